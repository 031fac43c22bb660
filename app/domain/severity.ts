/**
 * Severity grading of corrosion rates.
 *
 * Standards: NACE SP0775 (qualitative categorisation of carbon-steel
 * corrosion rates for oil-production systems). Published edges, in mpy:
 * general — low < 1, moderate 1–4.9, high 5–10, severe > 10 [pub];
 * pitting — low < 5, moderate 5–7.9, high 8–15, severe > 15 [mem].
 *
 * Edge rule (written down because the mm/y table has gaps such as
 * 0.12 | 0.13): the rate is converted to mpy exactly (÷ 0.0254) and
 * compared with the mpy edges as half-open bands —
 *   general: low < 1 ≤ moderate < 5 ≤ high ≤ 10 < severe
 *   pitting: low < 5 ≤ moderate < 8 ≤ high ≤ 15 < severe
 * so the upper edge of "high" belongs to "high", as in the table.
 *
 * The bands are a carbon-steel, oil-production convention (gradeForMaterial
 * uses them for carbon steel only); owners may pass
 * their own thresholds in mm/y: { moderate, high, severe } meaning low below
 * `moderate`, moderate from `moderate`, high from `high`, severe above
 * `severe` (the same shape as the default bands).
 */

import { MM_PER_MIL } from "./units.ts";
import { rangeError, requireNonNegative, requireObject, requirePositive } from "./validate.ts";

export type Severity = "low" | "moderate" | "high" | "severe";
export type RateKind = "general" | "pitting";

/** Mildest first; the index is the rank. */
export const SEVERITY_LEVELS: readonly Severity[] = ["low", "moderate", "high", "severe"];

/** Owner thresholds in mm/y. */
export interface SeverityThresholds {
  /** Rates from this value are at least "moderate". */
  moderate: number;
  /** Rates from this value are at least "high". */
  high: number;
  /** Rates above this value are "severe". */
  severe: number;
}

/**
 * Material families for grading. NACE SP0775 is written for carbon steel;
 * every other family is graded only with thresholds the owner sets for it.
 */
export type MaterialFamily =
  | "carbon-steel"
  | "stainless-steel"
  | "copper-alloy"
  | "aluminium-alloy"
  | "titanium"
  | "nickel-alloy"
  | "zinc"
  | "lead";

export const MATERIAL_FAMILIES: readonly MaterialFamily[] = [
  "carbon-steel",
  "stainless-steel",
  "copper-alloy",
  "aluminium-alloy",
  "titanium",
  "nickel-alloy",
  "zinc",
  "lead",
];

/** The owner's thresholds per material family, mm/y; a family or kind left out is not graded. */
export type FamilyThresholds = Partial<
  Record<MaterialFamily, { general?: SeverityThresholds; pitting?: SeverityThresholds }>
>;

/** The basis line shown wherever the default bands grade a rate. */
export const SP0775_BASIS = "NACE SP0775 bands, carbon steel";

/** The default NACE SP0775 band edges in mpy, with their source tags. */
export const SP0775_BANDS_MPY: Readonly<Record<RateKind, SeverityThresholds & { source: string }>> = {
  general: { moderate: 1, high: 5, severe: 10, source: "NACE SP0775 general corrosion rates, mpy [pub]" },
  pitting: { moderate: 5, high: 8, severe: 15, source: "NACE SP0775 pitting rates, mpy [mem]" },
};

/**
 * The same bands in mm/y, as exact conversions of the mpy edges (× 0.0254):
 * general 0.0254 / 0.127 / 0.254, pitting 0.127 / 0.2032 / 0.381 — for
 * screens; grading itself compares in mpy [der].
 */
export const SP0775_BANDS_MM_PER_YEAR: Readonly<Record<RateKind, SeverityThresholds>> = {
  general: {
    moderate: SP0775_BANDS_MPY.general.moderate * MM_PER_MIL,
    high: SP0775_BANDS_MPY.general.high * MM_PER_MIL,
    severe: SP0775_BANDS_MPY.general.severe * MM_PER_MIL,
  },
  pitting: {
    moderate: SP0775_BANDS_MPY.pitting.moderate * MM_PER_MIL,
    high: SP0775_BANDS_MPY.pitting.high * MM_PER_MIL,
    severe: SP0775_BANDS_MPY.pitting.severe * MM_PER_MIL,
  },
};

/**
 * Rates within this relative distance of an edge count as on it. Decimal
 * inputs such as 0.127 mm/y (= 5 mpy) must land on the edge even if a
 * division leaves them one ulp away; 10⁻⁹ is far below any measurement.
 */
const EDGE_TOLERANCE = 1e-9;

function grade(value: number, moderate: number, high: number, severe: number): Severity {
  if (value > severe * (1 + EDGE_TOLERANCE)) return "severe";
  if (value >= high * (1 - EDGE_TOLERANCE)) return "high";
  if (value >= moderate * (1 - EDGE_TOLERANCE)) return "moderate";
  return "low";
}

/** Checks owner thresholds: all finite and > 0, moderate < high <= severe. */
export function validateThresholds(thresholds: unknown): SeverityThresholds {
  requireObject("thresholds", thresholds);
  const t = thresholds as SeverityThresholds;
  const moderate = requirePositive("thresholds.moderate", t.moderate);
  const high = requirePositive("thresholds.high", t.high);
  const severe = requirePositive("thresholds.severe", t.severe);
  if (!(high > moderate)) throw rangeError("thresholds.high", `> thresholds.moderate ${moderate}`, high);
  if (!(severe >= high)) throw rangeError("thresholds.severe", `>= thresholds.high ${high}`, severe);
  return { moderate, high, severe };
}

/**
 * Severity category of a general or pitting rate given in mm/y. Without
 * thresholds, the NACE SP0775 bands (compared in mpy, exact conversion);
 * with thresholds, the owner's mm/y edges. A negative rate throws.
 */
export function severity(kind: RateKind, mmPerYear: number, thresholds?: SeverityThresholds): Severity {
  const rate = requireNonNegative("mmPerYear", mmPerYear);
  if (kind !== "general" && kind !== "pitting") throw rangeError("kind", 'one of "general", "pitting"', kind);
  if (thresholds !== undefined) {
    const t = validateThresholds(thresholds);
    return grade(rate, t.moderate, t.high, t.severe);
  }
  const bands = SP0775_BANDS_MPY[kind];
  return grade(rate / MM_PER_MIL, bands.moderate, bands.high, bands.severe);
}

/** The worse of two categories (the one a summary highlights). */
export function worseSeverity(a: Severity, b: Severity): Severity {
  const ra = SEVERITY_LEVELS.indexOf(a);
  const rb = SEVERITY_LEVELS.indexOf(b);
  if (ra < 0) throw rangeError("a", "a severity category", a);
  if (rb < 0) throw rangeError("b", "a severity category", b);
  return ra >= rb ? a : b;
}

/** A grade with the line that says what it was graded against; `severity: null` when not graded. */
export interface MaterialGrade {
  severity: Severity | null;
  basis: string;
}

/**
 * Grades a rate for a coupon of a given material family:
 * - carbon steel: the owner's carbon-steel thresholds when given, otherwise
 *   the NACE SP0775 bands ("NACE SP0775 bands, carbon steel");
 * - any other family: the owner's thresholds for that family and kind when
 *   given, otherwise not graded ("not graded: no thresholds for this
 *   material") — the carbon-steel bands are never borrowed;
 * - family unknown (null): not graded.
 */
export function gradeForMaterial(
  kind: RateKind,
  mmPerYear: number,
  family: MaterialFamily | null,
  thresholds: { carbonSteel?: SeverityThresholds; byFamily?: FamilyThresholds } = {},
): MaterialGrade {
  if (family === null) return { severity: null, basis: "not graded: the coupon's material is not known" };
  if (family === "carbon-steel") {
    const own = thresholds.carbonSteel ?? thresholds.byFamily?.["carbon-steel"]?.[kind];
    return own
      ? { severity: severity(kind, mmPerYear, own), basis: "owner thresholds, carbon steel" }
      : { severity: severity(kind, mmPerYear), basis: SP0775_BASIS };
  }
  const own = thresholds.byFamily?.[family]?.[kind];
  if (own) return { severity: severity(kind, mmPerYear, own), basis: `owner thresholds, ${family.replace("-", " ")}` };
  requireNonNegative("mmPerYear", mmPerYear);
  return { severity: null, basis: "not graded: no thresholds for this material" };
}

/**
 * The rates a category covers, in mm/y, for saying what a grade means: `lower` and
 * `upper` are the band's edges (null: open-ended), each with whether the edge itself
 * belongs to the band, following the edge rule above — low < moderate ≤ moderate band
 * < high ≤ high band ≤ severe < severe band. Without thresholds, the NACE SP0775 bands
 * (their exact mm/y conversions); with thresholds, the owner's.
 */
export interface SeverityBand {
  kind: RateKind;
  severity: Severity;
  lower: number | null;
  lowerIncluded: boolean;
  upper: number | null;
  upperIncluded: boolean;
}

export function severityBand(kind: RateKind, category: Severity, thresholds?: SeverityThresholds): SeverityBand {
  if (kind !== "general" && kind !== "pitting") throw rangeError("kind", 'one of "general", "pitting"', kind);
  const t = thresholds === undefined ? SP0775_BANDS_MM_PER_YEAR[kind] : validateThresholds(thresholds);
  switch (category) {
    case "low":
      return { kind, severity: category, lower: null, lowerIncluded: false, upper: t.moderate, upperIncluded: false };
    case "moderate":
      return { kind, severity: category, lower: t.moderate, lowerIncluded: true, upper: t.high, upperIncluded: false };
    case "high":
      return { kind, severity: category, lower: t.high, lowerIncluded: true, upper: t.severe, upperIncluded: true };
    case "severe":
      return { kind, severity: category, lower: t.severe, lowerIncluded: false, upper: null, upperIncluded: false };
    default:
      throw rangeError("severity", "a severity category", category);
  }
}
