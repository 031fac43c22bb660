import { isIsoDay } from "../domain/index.ts";
import { blank, readDecimal, textProblem } from "./form-fields";

/**
 * A thickness survey's reading at one CML as typed: the one parser the survey grid (as
 * the technician types), its save, the CSV import and the submit all use. Pure: the
 * browser imports it. Readings are entered in mm (the unit is on every field); the
 * reader's US units apply to what is shown beside them.
 */

export const SURVEY_METHODS = ["UT", "UT-scan", "RT", "EMAT", "other"] as const;
export type SurveyMethod = (typeof SURVEY_METHODS)[number];

export const surveyMethodLabels: Record<SurveyMethod, string> = {
  UT: "UT (spot readings)",
  "UT-scan": "UT scan",
  RT: "RT (profile radiography)",
  EMAT: "EMAT",
  other: "Other (say which in the notes)",
};

/** The most readings a CML takes in one survey (e.g. four quadrants at two rings). */
export const MAX_READINGS_PER_CML = 8;
/** Reading boxes on the grid and columns in the CSV: the four quadrants, 12, 3, 6 and 9 o'clock. */
export const READING_FIELDS = 4;

/** One CML's row as typed (every value a string, as the form and the file send them). */
export type SurveyRowText = {
  measuredOn: string;
  readings: string[];
  method: string;
  instrument: string;
  resolutionMm: string;
  technician: string;
  notes: string;
};

export type SurveyRowField = keyof SurveyRowText;

/** A reading ready to store (mm; thickness = the minimum of the readings). */
export type SurveyReadingValues = {
  measuredOn: string;
  thicknessMm: number;
  quadrantReadingsMm: number[];
  method: SurveyMethod;
  instrument: string;
  resolutionMm: number | null;
  technician: string;
  notes: string;
};

export const emptySurveyRow = (measuredOn = ""): SurveyRowText => ({
  measuredOn,
  readings: Array.from({ length: READING_FIELDS }, () => ""),
  method: "UT",
  instrument: "",
  resolutionMm: "",
  technician: "",
  notes: "",
});

/** What the row is judged against: the site's today and the CML's last approved reading. */
export type SurveyRowContext = { cmlTag: string; siteToday: string; lastApprovedOn: string | null };

export type ParsedSurveyRow =
  { empty: true } | { reading: SurveyReadingValues } | { errors: Partial<Record<SurveyRowField, string>> };

const MAX_THICKNESS_MM = 300;
const MAX_RESOLUTION_MM = 5;

function decimalProblem(raw: string, what: string, max: number): { value: number } | { problem: string } {
  const read = readDecimal(raw);
  if ("empty" in read) return { problem: `Enter ${what}.` };
  if ("problem" in read) return { problem: `${what[0].toUpperCase()}${what.slice(1)}: ${read.problem}.` };
  if (!(read.value > 0)) return { problem: `${what[0].toUpperCase()}${what.slice(1)} must be more than 0 mm.` };
  if (read.value > max) return { problem: `${what[0].toUpperCase()}${what.slice(1)} must be at most ${max} mm.` };
  const places = raw.trim().split(".")[1]?.length ?? 0;
  if (places > 3)
    return {
      problem: `${what[0].toUpperCase()}${what.slice(1)} takes at most 3 decimals (mm to the micrometre); '${raw.trim()}' has ${places}.`,
    };
  return { value: read.value };
}

/** True when nothing that makes a reading was typed (date, method and the like may be filled in advance). */
export function isBlankSurveyRow(row: SurveyRowText): boolean {
  return row.readings.every(blank) && blank(row.notes);
}

/**
 * One row as typed → a reading, or every field's problem naming the CML. A row with no
 * reading and no note is empty (skipped); the date is the site's calendar day, not in the
 * future and after the CML's last approved reading.
 */
export function parseSurveyRow(row: SurveyRowText, ctx: SurveyRowContext): ParsedSurveyRow {
  if (isBlankSurveyRow(row)) return { empty: true };
  const errors: Partial<Record<SurveyRowField, string>> = {};
  const at = `CML ${ctx.cmlTag}`;
  const day = (row.measuredOn ?? "").trim();
  if (!day) errors.measuredOn = `${at}: enter the date of the reading.`;
  else if (!isIsoDay(day)) errors.measuredOn = `${at}: write the date as YYYY-MM-DD (got '${day.slice(0, 20)}').`;
  else if (day > ctx.siteToday)
    errors.measuredOn = `${at}: the date ${day} is in the future (today at the site is ${ctx.siteToday}).`;
  else if (ctx.lastApprovedOn && day <= ctx.lastApprovedOn)
    errors.measuredOn = `${at}: the date must be after the CML's last approved reading on ${ctx.lastApprovedOn}.`;

  const typed = row.readings.map((r) => (r ?? "").trim()).filter((r) => r !== "");
  const values: number[] = [];
  if (row.readings.length > MAX_READINGS_PER_CML)
    errors.readings = `${at}: at most ${MAX_READINGS_PER_CML} readings per CML.`;
  else if (typed.length === 0) errors.readings = `${at}: enter at least one thickness reading (mm), or clear the note.`;
  else
    for (const [i, raw] of typed.entries()) {
      const read = decimalProblem(raw, `reading ${i + 1}`, MAX_THICKNESS_MM);
      if ("problem" in read) {
        errors.readings = `${at}: ${read.problem}`;
        break;
      }
      values.push(read.value);
    }

  const method = (row.method ?? "").trim() || "UT";
  if (!(SURVEY_METHODS as readonly string[]).includes(method))
    errors.method = `${at}: choose the method: ${SURVEY_METHODS.join(", ")}.`;

  let resolution: number | null = null;
  if (!blank(row.resolutionMm)) {
    const read = decimalProblem(row.resolutionMm, "the resolution", MAX_RESOLUTION_MM);
    if ("problem" in read) errors.resolutionMm = `${at}: ${read.problem}`;
    else resolution = read.value;
  }

  const text = (field: "instrument" | "technician" | "notes", what: string, max: number, multiline = false) => {
    const value = (row[field] ?? "").trim();
    const problem = textProblem(value, what, multiline);
    if (problem) errors[field] = `${at}: ${problem}`;
    else if (value.length > max) errors[field] = `${at}: keep ${what} to ${max} characters.`;
    return value;
  };
  const instrument = text("instrument", "the instrument", 120);
  const technician = text("technician", "the technician's name", 120);
  const notes = text("notes", "the notes", 2000, true);

  if (Object.keys(errors).length > 0) return { errors };
  return {
    reading: {
      measuredOn: day,
      thicknessMm: Math.min(...values.slice(0, MAX_READINGS_PER_CML)),
      quadrantReadingsMm: values,
      method: method as SurveyMethod,
      instrument,
      resolutionMm: resolution,
      technician,
      notes,
    },
  };
}

/** A stored reading shown back as text. */
export function surveyRowTextOf(r: SurveyReadingValues): SurveyRowText {
  const readings = r.quadrantReadingsMm.map(String);
  while (readings.length < READING_FIELDS) readings.push("");
  return {
    measuredOn: r.measuredOn,
    readings,
    method: r.method,
    instrument: r.instrument,
    resolutionMm: r.resolutionMm === null ? "" : String(r.resolutionMm),
    technician: r.technician,
    notes: r.notes,
  };
}

/** The grid's form field of a CML's row: `cml.<id>.<field>` (readings: `cml.<id>.reading1` …). */
export const surveyFieldName = (cmlId: string, field: Exclude<SurveyRowField, "readings"> | `reading${number}`) =>
  `cml.${cmlId}.${field}`;

/** The rows of a grid form body, by CML id (only CMLs that sent a field). */
export function surveyRowsOfForm(values: Record<string, string>): Map<string, SurveyRowText> {
  const rows = new Map<string, SurveyRowText>();
  for (const [name, value] of Object.entries(values)) {
    const m = /^cml\.([^.]+)\.(measuredOn|method|instrument|resolutionMm|technician|notes|reading([1-8]))$/.exec(name);
    if (!m) continue;
    const row = rows.get(m[1]) ?? { ...emptySurveyRow(), method: "" };
    if (m[3]) {
      const i = Number(m[3]) - 1;
      while (row.readings.length <= i) row.readings.push("");
      row.readings[i] = value;
    } else row[m[2] as Exclude<SurveyRowField, "readings">] = value;
    rows.set(m[1], row);
  }
  return rows;
}
