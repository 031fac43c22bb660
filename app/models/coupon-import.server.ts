import { parse as parseCsv } from "csv-parse/sync";
import { COUPON_COLUMNS, parseCoupon, type CouponColumn, type CouponRecord } from "../services/coupon-spec";
import type { Db } from "../services/db.server";
import { toCsv } from "../services/csv";
import { refusedFile } from "../services/outcome";
import { auditedWrite, type Actor } from "./audit.server";
import { couponAuditSnapshot, couponRow, serialTaken } from "./coupons.server";

/** Coupon stock from a CSV file: the template, reading the file, and the all-or-nothing import. */

/** One problem of an import: the file line (1 = header), the column, and what is wrong. */
export type CsvProblem = { line: number; column: string | null; value?: string; message: string };
export type CsvImportResult = { count: number; serials: string[] };
/** What a refused import says: every problem, by line, and how many lines were read. */
export type CsvRefusal = { problems: CsvProblem[]; rowsRead: number };

const refuse = (refusal: CsvRefusal) => refusedFile(refusal);

export const CSV_MAX_ROWS = 5000;
export const CSV_MAX_BYTES = 2_000_000;

const columnOrder: string[] = COUPON_COLUMNS.map((c) => c.name);
/** By line, then in the template's column order (stable for equal keys). */
export const sortProblems = (problems: CsvProblem[], order: readonly string[] = columnOrder) =>
  problems
    .map((p, i) => ({ p, i }))
    .sort(
      (a, b) => a.p.line - b.p.line || order.indexOf(a.p.column ?? "") - order.indexOf(b.p.column ?? "") || a.i - b.i,
    )
    .map(({ p }) => p);

/** "line 4, initial_mass_g: '12,3456' uses a decimal comma; use a point" */
export function describeProblem(p: CsvProblem): string {
  return `line ${p.line}${p.column ? `, ${p.column}` : ""}: ${p.message}`;
}

/** The template header: our own column names, units in the names. */
export function couponCsvTemplate(): string {
  const header = COUPON_COLUMNS.map((c) => c.name);
  const example = (values: Partial<Record<CouponColumn, string>>) => header.map((h) => values[h as CouponColumn] ?? "");
  return toCsv(header, [
    example({
      serial: "CS-24001",
      material: "carbon-steel",
      shape: "strip",
      length_mm: "76.2",
      width_mm: "12.7",
      thickness_mm: "1.6",
      hole_diameter_mm: "6.4",
      initial_mass_g: "11.8342",
      lot: "L-2408",
      certificate: "MC-2408-17",
    }),
    example({
      serial: "SS-24002",
      material: "ss-316l",
      shape: "disc",
      diameter_mm: "31.75",
      thickness_mm: "3.18",
      hole_diameter_mm: "7.9",
      initial_mass_g: "17.5021",
      balance_resolution_g: "0.0001",
      lot: "L-2409",
    }),
    example({
      serial: "CS-24003",
      material: "G10180",
      shape: "flush-disc",
      diameter_mm: "25.4",
      initial_mass_g: "4.2107",
      density_g_cm3: "7.85",
      density_source: "Supplier certificate MC-2410-02",
    }),
  ]);
}

/** Number of newlines inside a parsed record: a quoted value can span lines. */
const newlinesIn = (record: string[]) => record.reduce((n, f) => n + (f.match(/\n/g)?.length ?? 0), 0);

export type ParsedCsvRow = { line: number; values: Record<string, string> };
/** A column an import knows: its header name and whether the header must have it. */
export type CsvColumnSpec = { name: string; required?: boolean };

/** Reads a coupon file into header-keyed rows with their line numbers, or the problems that stop it. */
export function readCouponCsv(text: string): { rows: ParsedCsvRow[]; problems: CsvProblem[] } {
  return readCsvTable(text, COUPON_COLUMNS, "coupons");
}

/**
 * Reads an import file (any of the CSV imports) into header-keyed rows with their line
 * numbers, or the problems that stop it: the header against the import's columns, the
 * row limit, values that spill past the header. `rowsWord` names what a line holds.
 */
export function readCsvTable(
  text: string,
  columns: readonly CsvColumnSpec[],
  rowsWord: string,
): { rows: ParsedCsvRow[]; problems: CsvProblem[] } {
  const body = text.replace(/^\uFEFF/, "");
  if (body.trim() === "")
    return {
      rows: [],
      problems: [
        {
          line: 1,
          column: null,
          message: "The file is empty; its first line must be the header (download the template).",
        },
      ],
    };
  const garbled = body.indexOf("\uFFFD");
  if (garbled >= 0)
    return {
      rows: [],
      problems: [
        {
          line: body.slice(0, garbled).split("\n").length,
          column: null,
          message:
            "This line has characters that are not UTF-8 text; save the file as “CSV UTF-8” and import it again.",
        },
      ],
    };
  const firstLine = body.split(/\r?\n/, 1)[0];
  // Spreadsheets set to a decimal-comma locale save with semicolons (or tabs) between columns.
  const delimiter = firstLine.includes(",")
    ? ","
    : firstLine.includes(";")
      ? ";"
      : firstLine.includes("\t")
        ? "\t"
        : ",";
  let records: Array<{ record: string[]; info: { lines: number } }>;
  try {
    records = parseCsv(body, {
      bom: true,
      delimiter,
      info: true,
      relax_column_count: true,
      skip_empty_lines: true,
      skip_records_with_empty_values: true,
      trim: true,
    }) as unknown as Array<{ record: string[]; info: { lines: number } }>;
  } catch (error) {
    const e = error as { code?: string; lines?: number; message: string };
    const why =
      e.code === "CSV_QUOTE_NOT_CLOSED"
        ? "a quoted value is never closed; check the quotation marks"
        : e.code === "CSV_INVALID_CLOSING_QUOTE" || e.code === "CSV_NON_TRIMABLE_CHAR_AFTER_CLOSING_QUOTE"
          ? "a quotation mark sits in the middle of a value; put the whole value in quotes and double any quote inside it"
          : "the file is not valid CSV";
    return {
      rows: [],
      problems: [{ line: e.lines ?? 1, column: null, message: `The file could not be read: ${why}.` }],
    };
  }
  const [head, ...data] = records;
  const header = head.record.map((h) => h.trim().toLowerCase());
  const headerLine = head.info.lines - newlinesIn(head.record);
  const problems: CsvProblem[] = [];
  const known = new Set<string>(columns.map((c) => c.name));
  const seen = new Set<string>();
  header.forEach((h, i) => {
    if (h === "")
      problems.push({ line: headerLine, column: `column ${i + 1}`, message: "This column has no name in the header." });
    else if (!known.has(h))
      problems.push({
        line: headerLine,
        column: h,
        message: `Unknown column '${h}'. The columns are: ${columns.map((c) => c.name).join(", ")}.`,
      });
    else if (seen.has(h))
      problems.push({ line: headerLine, column: h, message: `The column '${h}' appears twice in the header.` });
    seen.add(h);
  });
  for (const c of columns)
    if (c.required && !seen.has(c.name))
      problems.push({
        line: headerLine,
        column: c.name,
        message: `The header has no '${c.name}' column; it is required.`,
      });
  if (problems.length > 0) return { rows: [], problems };
  if (data.length === 0)
    return {
      rows: [],
      problems: [{ line: headerLine + 1, column: null, message: `The file has a header but no ${rowsWord} below it.` }],
    };
  if (data.length > CSV_MAX_ROWS)
    return {
      rows: [],
      problems: [
        {
          line: 1,
          column: null,
          message: `The file has ${data.length} ${rowsWord}; import at most ${CSV_MAX_ROWS} at a time.`,
        },
      ],
    };

  const rows: ParsedCsvRow[] = [];
  for (const { record, info } of data) {
    const line = info.lines - newlinesIn(record);
    const extra = record.slice(header.length).filter((v) => v.trim() !== "");
    if (extra.length > 0) {
      problems.push({
        line,
        column: null,
        message: `This line has ${record.length} values but the header has ${header.length} columns; a value with a comma must be in quotes.`,
      });
      continue;
    }
    rows.push({ line, values: Object.fromEntries(header.map((h, i) => [h, record[i] ?? ""])) });
  }
  return { rows, problems };
}

/**
 * Imports coupons from CSV text, all or nothing: every line is checked (values,
 * geometry, duplicates in the file and in the stock) before anything is written; then
 * every coupon is inserted in one transaction with its audit event.
 */
export async function importCoupons(
  conn: Db,
  ownerId: string,
  actor: Actor,
  text: string,
  requestId?: string | null,
): Promise<CsvImportResult> {
  if (text.length > CSV_MAX_BYTES)
    throw refuse({
      rowsRead: 0,
      problems: [
        { line: 1, column: null, message: `The file is larger than ${CSV_MAX_BYTES / 1_000_000} MB; split it.` },
      ],
    });
  const { rows, problems } = readCouponCsv(text);
  const valid: Array<{ line: number; coupon: CouponRecord }> = [];
  const bySerial = new Map<string, number>();
  for (const { line, values } of rows) {
    const parsed = parseCoupon(values);
    if (!parsed.ok)
      for (const issue of parsed.issues)
        problems.push({ line, column: issue.field, value: values[issue.field], message: issue.message });
    // Duplicates are worth knowing even on a line with other problems.
    const serial = parsed.ok
      ? parsed.value.serial
      : parsed.issues.some((i) => i.field === "serial")
        ? ""
        : values.serial.trim();
    if (serial) {
      const earlier = bySerial.get(serial);
      if (earlier !== undefined)
        problems.push({
          line,
          column: "serial",
          value: serial,
          message: `The serial ${serial} is already on line ${earlier} of this file.`,
        });
      else bySerial.set(serial, line);
    }
    if (parsed.ok) valid.push({ line, coupon: parsed.value });
  }
  if (bySerial.size > 0) {
    const existing: Array<{ serial: string }> = await conn("coupons")
      .where({ owner_id: ownerId })
      .whereIn("serial", [...bySerial.keys()])
      .select("serial");
    for (const { serial } of existing)
      problems.push({ line: bySerial.get(serial)!, column: "serial", value: serial, message: serialTaken(serial) });
  }
  if (problems.length > 0) throw refuse({ rowsRead: rows.length, problems: sortProblems(problems) });

  try {
    return await auditedWrite(conn, { ownerId, actor, requestId }, async ({ trx, record }) => {
      const batch = valid.map((v) => couponRow(ownerId, v.coupon));
      const inserted: Array<{ id: string; serial: string }> = [];
      for (let i = 0; i < batch.length; i += 500)
        inserted.push(
          ...(await trx("coupons")
            .insert(batch.slice(i, i + 500))
            .returning(["id", "serial"])),
        );
      const idBySerial = new Map(inserted.map((r) => [r.serial, r.id]));
      for (const row of batch)
        await record({
          action: "coupon.created",
          recordType: "coupon",
          recordId: idBySerial.get(row.serial)!,
          after: couponAuditSnapshot(row),
          reason: `CSV import of ${batch.length} coupon${batch.length === 1 ? "" : "s"}`,
        });
      return { count: batch.length, serials: batch.map((b) => b.serial) };
    });
  } catch (error) {
    // Someone added one of these serials between the check and the insert.
    const pg = error as { code?: string; constraint?: string; detail?: string };
    if (pg?.code === "23505" && pg.constraint === "coupons_owner_serial_key") {
      const serial = /\(owner_id, serial\)=\([^,]+, (.+)\)/.exec(pg.detail ?? "")?.[1];
      const line = serial ? bySerial.get(serial) : undefined;
      throw refuse({
        rowsRead: rows.length,
        problems: [
          {
            line: line ?? 1,
            column: "serial",
            value: serial,
            message: serial ? serialTaken(serial) : "A serial in the file is already in your coupon stock.",
          },
        ],
      });
    }
    throw error;
  }
}
