import { assessCoupon, type CouponAssessment, type CouponResultInput } from "../domain/index.ts";
import { readDecimal, textProblem } from "./form-fields";

/**
 * The lab result of one removed coupon: its fields, the text people type or a CSV
 * holds, and the one parser that turns that text into numbers with a message per field
 * in words. The lab form (in the browser, for its live preview, and on the server), the
 * lab CSV import and later the API validate a lab result with this parser only.
 */

export type LabInputs = {
  cleaningMethod: string;
  couponMassesG: number[];
  finalMassG: number | null;
  blankInitialMassG: number | null;
  blankMassesG: number[];
  baseMetalFromCycle: number | null;
  pitDepthsMm: number[];
  labNotes: string;
};

/**
 * Where the mass loss comes from: one final weighing, the last of the cleaning cycles
 * (less the blank's loss), or the ASTM G1 §7 cleaning curve. Empty: whichever masses
 * were entered (both kinds at once are refused).
 */
export const MASS_LOSS_METHODS = ["final-mass", "last-cycle", "cleaning-curve"] as const;
export type MassLossChoice = (typeof MASS_LOSS_METHODS)[number];

/** A lab result as text: one string per field, a list per series of weighings. */
export type LabText = {
  cleaningMethod: string;
  /** "" or one of MASS_LOSS_METHODS; absent (CSV): read from the masses given. */
  massLossMethod?: string;
  couponMassesG: string[];
  finalMassG: string;
  blankInitialMassG: string;
  blankMassesG: string[];
  baseMetalFromCycle: string;
  pitDepthsMm: string;
  labNotes: string;
};

export const LAB_LIMITS = { cleaningMethodChars: 200, labNotesChars: 4000, cycles: 10, pitDepths: 200 } as const;

export type LabField = keyof LabInputs | "massLossMethod";
export type LabErrors = Partial<Record<LabField, string>>;
export type LabParse =
  | { lab: LabInputs; method: MassLossChoice; errors: Record<string, never> }
  | { lab?: undefined; method: MassLossChoice | null; errors: LabErrors };

const cap = (s: string) => s.charAt(0).toUpperCase() + s.slice(1);

/**
 * A list of numbers as people type it: separated by commas, semicolons, spaces or new
 * lines. "0,35" (a comma between digits, nothing else) is a decimal comma, which a list
 * that also takes commas as separators cannot read either way: it is named for each
 * value it affects ("0,35 — use a point as the decimal mark"), never guessed.
 */
export function parseNumberList(
  text: string,
  max: number = LAB_LIMITS.pitDepths,
): { values: number[]; problems: string[] } {
  const values: number[] = [];
  const problems: string[] = [];
  const chunks = text.split(/[\s;]+/).filter(Boolean);
  // a long list is refused before any value is read (a count, not every value's problem)
  const count = chunks.reduce(
    (n, chunk) => n + (/^[+-]?\d+,\d+$/.test(chunk) ? 1 : chunk.split(",").filter(Boolean).length),
    0,
  );
  if (count > max) return { values: [], problems: [`enter at most ${max} values (${count} were given)`] };
  for (const chunk of chunks) {
    if (/^[+-]?\d+,\d+$/.test(chunk)) {
      problems.push(`${chunk} — use a point as the decimal mark (${chunk.replace(",", ".")})`);
      values.push(NaN);
      continue;
    }
    for (const token of chunk.split(",").filter(Boolean)) {
      const read = readDecimal(token);
      if ("value" in read) values.push(read.value);
      else if ("problem" in read) {
        problems.push(`'${token}' is not a number`);
        values.push(NaN);
      }
    }
  }
  return { values, problems };
}

const trimTrailing = (list: string[]) => {
  const out = [...list];
  while (out.length && out[out.length - 1].trim() === "") out.pop();
  return out;
};

const BOTH_MASSES =
  "Both a final mass and masses after cleaning cycles are entered: choose under “Mass loss from” which one the rate uses, or clear one.";

/**
 * Text fields → numbers; every field's problem at once, each named with its label. A
 * value that cannot be read stays in `candidate` as NaN, so the calculation's own
 * checks (checkLab) can still judge the other fields in the same round.
 */
export function parseLabText(raw: LabText): LabParse & { candidate: LabInputs } {
  const errors: LabErrors = {};
  const number = (field: LabField, text: string, label: string): number | null => {
    const read = readDecimal(text);
    if ("empty" in read) return null;
    if ("problem" in read) {
      errors[field] ??= `${label}: ${read.problem}.`;
      return NaN;
    }
    return read.value;
  };
  const series = (field: LabField, texts: string[], what: string) => {
    const given = trimTrailing(texts);
    const problems: string[] = [];
    if (given.length > LAB_LIMITS.cycles) {
      errors[field] = `${cap(what)}: enter at most ${LAB_LIMITS.cycles} cleaning cycles (${given.length} were given).`;
      return [];
    }
    const values = given.map((t, i) => {
      const read = readDecimal(t);
      if ("value" in read) return read.value;
      problems.push(
        "empty" in read
          ? `after cycle ${i + 1} it is empty; fill the cycles from cycle 1 without gaps`
          : `after cycle ${i + 1}, ${read.problem}`,
      );
      return NaN;
    });
    if (problems.length) errors[field] = `${cap(what)}: ${problems.join("; ")}.`;
    return values;
  };
  const couponMassesG = series("couponMassesG", raw.couponMassesG, "coupon mass");
  const blankMassesG = series("blankMassesG", raw.blankMassesG, "blank mass");
  const finalMassG = number("finalMassG", raw.finalMassG, "Final mass");
  const blankInitialMassG = number("blankInitialMassG", raw.blankInitialMassG, "Blank mass before cleaning");
  let cycle = number("baseMetalFromCycle", raw.baseMetalFromCycle, "First base-metal cycle");
  if (cycle !== null && !Number.isNaN(cycle) && (!Number.isInteger(cycle) || cycle < 1)) {
    errors.baseMetalFromCycle ??= "First base-metal cycle: enter a whole cycle number, 1 or more.";
    cycle = NaN;
  }
  const pits = parseNumberList(raw.pitDepthsMm);
  if (pits.problems.length) errors.pitDepthsMm = `Pit depths: ${pits.problems.join("; ")}.`;
  const cleaningProblem = textProblem(raw.cleaningMethod.trim(), "the cleaning method");
  if (raw.cleaningMethod.trim().length > LAB_LIMITS.cleaningMethodChars)
    errors.cleaningMethod = `Keep the cleaning method under ${LAB_LIMITS.cleaningMethodChars} characters.`;
  else if (cleaningProblem) errors.cleaningMethod = cleaningProblem;
  const notesProblem = textProblem(raw.labNotes.trim(), "the lab notes", true);
  if (raw.labNotes.trim().length > LAB_LIMITS.labNotesChars)
    errors.labNotes = `Keep lab notes under ${LAB_LIMITS.labNotesChars} characters.`;
  else if (notesProblem) errors.labNotes = notesProblem;

  // Which masses the rate uses: never silently one over the other.
  const hasCycles = couponMassesG.length > 0;
  const hasFinal = finalMassG !== null;
  const chosen = (raw.massLossMethod ?? "").trim();
  let method: MassLossChoice | null = null;
  if (chosen === "") {
    if (hasCycles && hasFinal) {
      errors.finalMassG ??= BOTH_MASSES;
      errors.couponMassesG ??= BOTH_MASSES;
    }
    method = hasCycles ? (cycle !== null ? "cleaning-curve" : "last-cycle") : "final-mass";
  } else if ((MASS_LOSS_METHODS as readonly string[]).includes(chosen)) {
    method = chosen as MassLossChoice;
    if (method === "final-mass" && !hasFinal)
      errors.finalMassG ??=
        "Enter the final mass after cleaning, or choose the cleaning cycles under “Mass loss from”.";
    if (method !== "final-mass" && !hasCycles)
      errors.couponMassesG ??=
        "Enter the coupon's mass after each cleaning cycle, or choose the final mass under “Mass loss from”.";
    if (method === "cleaning-curve" && cycle === null)
      errors.baseMetalFromCycle ??= "Choose the first cycle of the base-metal line for the cleaning curve.";
  } else {
    errors.massLossMethod =
      "Choose where the mass loss comes from: the final mass, the last cycle or the cleaning curve.";
  }
  const useCycles = method !== "final-mass";
  const candidate: LabInputs = {
    cleaningMethod: raw.cleaningMethod.trim(),
    couponMassesG: useCycles ? couponMassesG : [],
    finalMassG: useCycles ? null : finalMassG,
    blankInitialMassG,
    blankMassesG,
    baseMetalFromCycle: method === "cleaning-curve" ? cycle : null,
    pitDepthsMm: pits.values,
    labNotes: raw.labNotes.trim(),
  };
  if (Object.keys(errors).length || method === null) return { errors, method, candidate };
  return { errors: {}, method, lab: candidate, candidate };
}

/**
 * The lab text judged whole, as the form, its preview and the server do: the parser's
 * messages and the calculation's own checks (ASTM G1 mass loss, cleaning cycles, blank,
 * pit depths) in one round. A field the parser already refused keeps the parser's message.
 */
export function checkLab(
  base: CouponResultInput,
  raw: LabText,
): { lab?: LabInputs; method: MassLossChoice | null; errors: Record<string, string>; result?: CouponAssessment } {
  const parsed = parseLabText(raw);
  const c = parsed.candidate;
  const outcome = assessCoupon({
    ...base,
    couponMassesG: c.couponMassesG,
    finalMassG: c.finalMassG,
    blankInitialMassG: c.blankInitialMassG,
    blankMassesG: c.blankMassesG,
    baseMetalFromCycle: c.baseMetalFromCycle,
    pitDepthsMm: c.pitDepthsMm,
  });
  const errors: Record<string, string> = { ...parsed.errors };
  if (!outcome.ok) for (const [field, message] of Object.entries(outcome.errors)) errors[field] ??= message;
  if (Object.keys(errors).length || !parsed.lab || !outcome.ok) return { method: parsed.method, errors };
  return { lab: parsed.lab, method: parsed.method, errors: {}, result: outcome.result };
}

/** Numbers as text again, for results stored before their typed text was kept. */
export function labTextOf(lab: LabInputs): LabText {
  const method: MassLossChoice =
    lab.couponMassesG.length === 0 ? "final-mass" : lab.baseMetalFromCycle !== null ? "cleaning-curve" : "last-cycle";
  return {
    cleaningMethod: lab.cleaningMethod,
    massLossMethod: method,
    couponMassesG: lab.couponMassesG.map(String),
    finalMassG: lab.finalMassG?.toString() ?? "",
    blankInitialMassG: lab.blankInitialMassG?.toString() ?? "",
    blankMassesG: lab.blankMassesG.map(String),
    baseMetalFromCycle: lab.baseMetalFromCycle?.toString() ?? "",
    pitDepthsMm: lab.pitDepthsMm.join(" "),
    labNotes: lab.labNotes,
  };
}
