import { parse } from "csv-parse/sync";
import type { Knex } from "knex";
import type { SessionUser } from "../context";
import { toCsv } from "../services/csv";
import { Forbidden, Invalid, refusedFile } from "../services/outcome";
import { can } from "../services/permissions";
import { parseLabText, type LabInputs, type LabText } from "../services/lab-spec";
import { assessLabEntry, exposuresForLab, writeLabResults, type ExposureForLab } from "./lab-results.server";
import { ownerSettings } from "./owner-settings.server";

/**
 * Lab results from a CSV file: one row per removed coupon, our own column names with
 * units in the header. The whole file is checked first and saved in one transaction;
 * one bad row rejects the file. Importing the same rows again changes nothing.
 */

export const MAX_CYCLES = 5;

export const LAB_CSV_COLUMNS = [
  { name: "coupon_serial", help: "serial of the removed coupon, as on the pull schedule", required: true },
  { name: "cleaning_method", help: "e.g. inhibited hydrochloric acid" },
  ...Array.from({ length: MAX_CYCLES }, (_, i) => ({
    name: `coupon_mass_cycle${i + 1}_g`,
    help: `coupon mass after cleaning cycle ${i + 1}, g`,
  })),
  { name: "final_mass_g", help: "final mass, g, when no cycles were recorded" },
  { name: "blank_mass_before_g", help: "blank (control) coupon mass before cleaning, g" },
  ...Array.from({ length: MAX_CYCLES }, (_, i) => ({
    name: `blank_mass_cycle${i + 1}_g`,
    help: `blank mass after cleaning cycle ${i + 1}, g`,
  })),
  {
    name: "cleaning_curve_from_cycle",
    help: "first base-metal cycle for the cleaning-curve method; empty = last cycle minus the blank",
  },
  { name: "pit_depths_mm", help: "deepest pit depths, mm, separated by spaces or semicolons" },
  { name: "lab_notes", help: "free text" },
] as const;

export function labTemplateCsv(): string {
  return toCsv(
    LAB_CSV_COLUMNS.map((c) => c.name),
    [],
  );
}

export type RowProblem = { line: number; column: string; message: string };
export type RowOutcome = { line: number; serial: string; status: "saved" | "unchanged"; submissionId: string };

/** Maps a field error of the lab form to the CSV column it came from. */
const columnOf: Record<string, string> = {
  couponMassesG: "coupon_mass_cycle1_g",
  finalMassG: "final_mass_g",
  blankInitialMassG: "blank_mass_before_g",
  blankMassesG: "blank_mass_cycle1_g",
  baseMetalFromCycle: "cleaning_curve_from_cycle",
  pitDepthsMm: "pit_depths_mm",
  cleaningMethod: "cleaning_method",
  labNotes: "lab_notes",
  removedAt: "coupon_serial",
  installedAt: "coupon_serial",
  geometry: "coupon_serial",
  density: "coupon_serial",
  form: "coupon_serial",
};

/**
 * One CSV row → a lab result through the same parser as the lab form (services/lab-spec.ts);
 * only what is particular to the file is checked here: the serial, and cycles filled from
 * cycle 1 without gaps (each named by its column).
 */
function parseRow(
  record: Record<string, string>,
  line: number,
  problems: RowProblem[],
): { serial: string; lab: LabInputs; text: LabText } | null {
  const before = problems.length;
  const serial = (record.coupon_serial ?? "").trim();
  if (!serial) problems.push({ line, column: "coupon_serial", message: "The coupon serial is missing." });
  const series = (prefix: string) => {
    const texts: string[] = [];
    let gap = false;
    for (let i = 1; i <= MAX_CYCLES; i++) {
      const column = `${prefix}${i}_g`;
      const text = (record[column] ?? "").trim();
      if (text === "") gap = true;
      else if (gap) problems.push({ line, column, message: "Cycles must be filled from cycle 1 without gaps." });
      else texts.push(text);
    }
    return texts;
  };
  const text: LabText = {
    cleaningMethod: record.cleaning_method ?? "",
    couponMassesG: series("coupon_mass_cycle"),
    finalMassG: record.final_mass_g ?? "",
    blankInitialMassG: record.blank_mass_before_g ?? "",
    blankMassesG: series("blank_mass_cycle"),
    baseMetalFromCycle: record.cleaning_curve_from_cycle ?? "",
    pitDepthsMm: record.pit_depths_mm ?? "",
    labNotes: record.lab_notes ?? "",
  };
  const parsed = parseLabText(text);
  for (const [field, message] of Object.entries(parsed.errors))
    problems.push({ line, column: columnOf[field] ?? field, message });
  if (problems.length > before || !parsed.lab) return null;
  return { serial, lab: parsed.lab, text };
}

export type ImportResult = { rows: RowOutcome[]; notes: string[] };
/** What a refused file says (the details of its Invalid): every problem by line and column. */
export type ImportRefusal = { problems: RowProblem[]; notes: string[] };

const refuse = (notes: string[], problems: RowProblem[]) => refusedFile({ problems, notes } satisfies ImportRefusal);

type Settings = Awaited<ReturnType<typeof ownerSettings>>;

/** The settings read for the exposure's owner (read once per owner of the file's coupons). */
function settingsOf(settings: Map<string, Settings>, exposure: ExposureForLab): Settings {
  const found = settings.get(exposure.ownerId);
  if (!found) throw new Error(`settings of owner ${exposure.ownerId} were not read`);
  return found;
}

export async function importLabCsv(
  conn: Knex,
  user: SessionUser,
  text: string,
  requestId?: string,
): Promise<ImportResult> {
  if (!can(user, "recordWork")) throw new Forbidden("Only contractor technicians import lab results.");
  const notes: string[] = [];
  if (text.charCodeAt(0) === 0xfeff) notes.push("The file starts with a byte-order mark; it was ignored.");
  if (text.includes("\r\n")) notes.push("Windows line ends (CRLF) were read as ordinary line ends.");
  let records: Record<string, string>[];
  try {
    records = parse(text, {
      bom: true,
      columns: true,
      skip_empty_lines: true,
      trim: false,
      relax_column_count: false,
    }) as Record<string, string>[];
  } catch (error) {
    const e = error as { lines?: number; message: string };
    throw refuse(notes, [{ line: e.lines ?? 1, column: "—", message: `The file is not readable CSV: ${e.message}` }]);
  }
  const known = new Set<string>(LAB_CSV_COLUMNS.map((c) => c.name));
  const header = records.length
    ? Object.keys(records[0])
    : text
        .replace(/^\uFEFF/, "")
        .split(/\r?\n/)[0]
        .split(",");
  const unknown = header.filter((h) => !known.has(h));
  if (!header.includes("coupon_serial")) {
    throw refuse(notes, [
      { line: 1, column: "coupon_serial", message: "The header has no coupon_serial column; start from the template." },
    ]);
  }
  if (unknown.length) {
    throw refuse(
      notes,
      unknown.map((u) => ({
        line: 1,
        column: u,
        message: `Unknown column “${u}”; the template lists the columns Wallcast reads.`,
      })),
    );
  }
  if (records.length === 0)
    throw refuse(notes, [{ line: 2, column: "—", message: "The file has a header but no rows." }]);
  if (records.length > 500)
    throw refuse(notes, [{ line: 502, column: "—", message: "Import at most 500 rows at a time." }]);

  const problems: RowProblem[] = [];
  const parsed: Array<{ line: number; serial: string; lab: LabInputs; text: LabText }> = [];
  const seen = new Map<string, number>();
  records.forEach((record, i) => {
    const line = i + 2; // line 1 is the header
    const row = parseRow(record, line, problems);
    if (!row) return;
    const first = seen.get(row.serial);
    if (first)
      problems.push({ line, column: "coupon_serial", message: `Coupon ${row.serial} is already on line ${first}.` });
    else seen.set(row.serial, line);
    parsed.push({ line, ...row });
  });
  if (problems.length) throw refuse(notes, problems);

  // Set-wise: a constant number of queries for the reads (plus two per owner for its
  // settings), one find-or-create of each site's draft, one statement per kind of write.
  const rows = await conn.transaction(async (trx) => {
    const failures: RowProblem[] = [];
    const fail = (line: number, message: string, column = "coupon_serial") => failures.push({ line, column, message });
    // One read for every serial in the file, not one per row.
    const removed: Array<{ id: string; serial: string }> = await trx("coupon_exposures as e")
      .join("coupons as c", "c.id", "e.coupon_id")
      .whereIn(
        "c.serial",
        parsed.map((r) => r.serial),
      )
      .where("e.removed_by_organisation_id", user.organisation.id)
      .whereNotNull("e.removed_at")
      .select("e.id", "c.serial");
    const bySerial = new Map<string, Array<{ id: string }>>();
    for (const r of removed) bySerial.set(r.serial, [...(bySerial.get(r.serial) ?? []), { id: r.id }]);
    const exposureOf = new Map<number, string>();
    for (const row of parsed) {
      const candidates = bySerial.get(row.serial) ?? [];
      if (candidates.length === 1) exposureOf.set(row.line, candidates[0].id);
      else
        fail(
          row.line,
          candidates.length === 0
            ? `No coupon ${row.serial} removed by your company is waiting for lab results.`
            : `Coupon serial ${row.serial} is ambiguous across owners.`,
        );
    }
    const exposures = await exposuresForLab(trx, user, [...exposureOf.values()]);
    const settings = new Map<string, Settings>();
    for (const ownerId of new Set([...exposures.values()].map((e) => e.ownerId)))
      settings.set(ownerId, await ownerSettings(trx, ownerId));

    const checked: Array<{ row: (typeof parsed)[number]; entry: ReturnType<typeof assessLabEntry> }> = [];
    for (const row of parsed) {
      const exposureId = exposureOf.get(row.line);
      if (!exposureId) continue;
      const exposure = exposures.get(exposureId);
      if (!exposure) {
        fail(row.line, `Coupon ${row.serial} is not at a site your company's contracts cover today.`);
        continue;
      }
      if (exposure.locked) {
        fail(
          row.line,
          `Coupon ${row.serial} is already in submission ${exposure.locked.reference} (${exposure.locked.status}).`,
        );
        continue;
      }
      try {
        checked.push({ row, entry: assessLabEntry(exposure, row.lab, row.text, settingsOf(settings, exposure)) });
      } catch (error) {
        if (!(error instanceof Invalid)) throw error;
        for (const [field, message] of Object.entries(error.fieldErrors))
          fail(row.line, message, columnOf[field] ?? field);
      }
    }
    if (failures.length)
      throw refuse(
        notes,
        failures.sort((x, y) => x.line - y.line),
      );

    const changed = checked.filter((c) => !c.entry.unchanged);
    const written = await writeLabResults(
      trx,
      user,
      changed.map((c) => c.entry),
      requestId,
    );
    const submissionOf = new Map(changed.map((c, i) => [c.row.line, written[i]]));
    return checked.map(({ row, entry }): RowOutcome => ({
      line: row.line,
      serial: row.serial,
      status: entry.unchanged ? "unchanged" : "saved",
      submissionId: submissionOf.get(row.line) ?? entry.exposure.draft?.submissionId ?? "",
    }));
  });
  return { rows, notes };
}
