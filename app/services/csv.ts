import { stringify } from "csv-stringify/sync";

/**
 * The one CSV writer for every download, and its one formula guard.
 * Pure (no server-only imports), so the browser could use it too.
 *
 * Spreadsheets run a text cell as a formula when it starts with = + - @ (and some read
 * a leading tab, CR or LF, or blanks before one of those, the same way). Names, reasons
 * and notes are typed by people, so such a text cell gets a leading apostrophe, which
 * the spreadsheet shows as text. JavaScript numbers are written as numbers and never
 * guarded: a rate of -0.012 or a temperature of -12.5 stays a number.
 */

export type CsvValue = string | number | bigint | boolean | Date | null | undefined | object;

const FORMULA_START = /^(?:[\t\r\n]|\s*[=+\-@])/;

/** One cell made safe for a spreadsheet: numbers pass, risky text is prefixed with '. */
export function guardCell(value: unknown): string | number {
  if (typeof value === "number") return Number.isFinite(value) ? value : "";
  if (value === null || value === undefined) return "";
  if (typeof value === "bigint") return value.toString();
  if (typeof value === "boolean") return value ? "true" : "false";
  if (value instanceof Date) return Number.isFinite(value.getTime()) ? value.toISOString() : "";
  const text = typeof value === "string" ? value : JSON.stringify(value);
  return FORMULA_START.test(text) ? `'${text}` : text;
}

/**
 * A header row and data rows as RFC 4180 text: CRLF line ends (the last line too),
 * quoted where a cell holds a comma, quote or line break, quotes doubled, every cell
 * through `guardCell`. `bom` puts a UTF-8 byte-order mark first, for the spreadsheet
 * programs that otherwise misread non-ASCII text. No headers, no header row.
 */
export function toCsv(
  headers: readonly string[],
  rows: readonly (readonly unknown[])[],
  options: { bom?: boolean } = {},
): string {
  const records = (headers.length > 0 ? [headers, ...rows] : rows).map((row) => row.map(guardCell));
  // With a record delimiter set, csv-stringify quotes a lone \n or \r only when told to.
  return stringify(records, { record_delimiter: "windows", quote_record_delimiter: true, bom: options.bom ?? false });
}
