import { readDecimal } from "./form-fields";

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

/** A lab result as text: one string per field, a list per series of weighings. */
export type LabText = {
  cleaningMethod: string;
  couponMassesG: string[];
  finalMassG: string;
  blankInitialMassG: string;
  blankMassesG: string[];
  baseMetalFromCycle: string;
  pitDepthsMm: string;
  labNotes: string;
};

export const LAB_LIMITS = { cleaningMethodChars: 200, labNotesChars: 4000, cycles: 10 } as const;

export type LabField = keyof LabInputs;
export type LabParse =
  { lab: LabInputs; errors: Record<string, never> } | { lab?: undefined; errors: Partial<Record<LabField, string>> };

const cap = (s: string) => s.charAt(0).toUpperCase() + s.slice(1);

/** Text fields → numbers; every field's problem at once, each named with its label. */
export function parseLabText(raw: LabText): LabParse {
  const errors: Partial<Record<LabField, string>> = {};
  const number = (field: LabField, text: string, label: string): number | null => {
    const read = readDecimal(text);
    if ("empty" in read) return null;
    if ("problem" in read) {
      errors[field] ??= `${label}: ${read.problem}.`;
      return null;
    }
    return read.value;
  };
  const trimTrailing = (list: string[]) => {
    const out = [...list];
    while (out.length && out[out.length - 1].trim() === "") out.pop();
    return out;
  };
  const series = (field: LabField, texts: string[], what: string) => {
    const values: number[] = [];
    const given = trimTrailing(texts);
    if (given.length > LAB_LIMITS.cycles) errors[field] ??= `Enter at most ${LAB_LIMITS.cycles} cleaning cycles.`;
    given.forEach((t, i) => {
      const n = number(field, t, `${cap(what)} after cycle ${i + 1}`);
      if (n === null && !errors[field])
        errors[field] = `${cap(what)} after cycle ${i + 1} is empty; fill the cycles from cycle 1 without gaps.`;
      if (n !== null) values.push(n);
    });
    return values;
  };
  const couponMassesG = series("couponMassesG", raw.couponMassesG, "coupon mass");
  const blankMassesG = series("blankMassesG", raw.blankMassesG, "blank mass");
  const finalMassG = number("finalMassG", raw.finalMassG, "Final mass");
  const blankInitialMassG = number("blankInitialMassG", raw.blankInitialMassG, "Blank mass before cleaning");
  const cycle = number("baseMetalFromCycle", raw.baseMetalFromCycle, "First base-metal cycle");
  if (cycle !== null && (!Number.isInteger(cycle) || cycle < 1))
    errors.baseMetalFromCycle ??= "First base-metal cycle: enter a whole cycle number, 1 or more.";
  const pitDepthsMm: number[] = [];
  for (const token of raw.pitDepthsMm.split(/[\s;]+/).filter(Boolean)) {
    const n = number("pitDepthsMm", token, "Pit depth");
    if (n !== null) pitDepthsMm.push(n);
  }
  if (raw.cleaningMethod.trim().length > LAB_LIMITS.cleaningMethodChars)
    errors.cleaningMethod = `Keep the cleaning method under ${LAB_LIMITS.cleaningMethodChars} characters.`;
  if (raw.labNotes.trim().length > LAB_LIMITS.labNotesChars)
    errors.labNotes = `Keep lab notes under ${LAB_LIMITS.labNotesChars} characters.`;
  if (Object.keys(errors).length) return { errors };
  return {
    errors: {},
    lab: {
      cleaningMethod: raw.cleaningMethod.trim(),
      couponMassesG,
      finalMassG: couponMassesG.length ? null : finalMassG,
      blankInitialMassG,
      blankMassesG,
      baseMetalFromCycle: cycle,
      pitDepthsMm,
      labNotes: raw.labNotes.trim(),
    },
  };
}
