/**
 * Units, constants and display conversions.
 *
 * Standards: ASTM G1 §8 (corrosion-rate constants K and the 8760-hour year),
 * ASTM G102 (Faraday constants), the SI and the international inch
 * (1 in = 25.4 mm exactly, 1959) and pound-force (1 lbf = 4.448 221 615 260 5 N
 * exactly), hence 1 mil = 0.0254 mm and 1 psi = 6894.757 293 168 361 Pa.
 *
 * Inside the library everything is SI-based: mm, g, cm², h, g/cm³, MPa, °C.
 * Display units are converted only here.
 *
 * The mm/y → mpy path: EXACT. mpy = (mm/y) / 0.0254. The rounded ratio of
 * the two published K constants (3.45×10⁶ / 8.76×10⁴ = 39.38) differs from
 * the exact 39.370 by 0.03 %; Wallcast never uses it, so a rate converted
 * back and forth is unchanged and severity bands, which are compared in mpy,
 * sit exactly on the published mpy edges.
 */

import { requireFinite, requirePositive, requireOneOf, rangeError } from "./validate.ts";

/** 1 mil = 0.001 in = 0.0254 mm, exact by the definition of the inch [der]. */
export const MM_PER_MIL = 0.0254;
/** 1 in = 25.4 mm, exact [der]. */
export const MM_PER_INCH = 25.4;
/** 1 psi = 1 lbf/in² = 4.4482216152605 N / 645.16 mm² [der]. */
export const MPA_PER_PSI = 4.4482216152605 / 645.16;

/** The ASTM G1 year for coupon, pitting and electrochemical rates: 365 d × 24 h [pub]. */
export const HOURS_PER_YEAR = 8760;
/** The year used between thickness surveys (API 570 rates from calendar dates): mean Julian year [cp]. */
export const DAYS_PER_YEAR_THICKNESS = 365.25;
/** Seconds in the 8760-hour year. */
export const SECONDS_PER_YEAR = HOURS_PER_YEAR * 3600;

/**
 * Faraday constant, C/mol — exact since the 2019 SI redefinition
 * (elementary charge × Avogadro constant, both fixed) [der].
 */
export const FARADAY_C_PER_MOL = 96485.33212331;

/**
 * ASTM G1 K constants for CR = K·W/(A·T·D) with W in g, A in cm², T in h,
 * D in g/cm³. Each is derived from its definition and the 8760-hour year;
 * the published rounded value is kept beside it for the record.
 */
export const K_CONSTANTS = {
  /** 10 mm/cm × 8760 h/y = 8.76×10⁴ — equal to the published value [pub]. */
  mmPerYear: 10 * HOURS_PER_YEAR,
  /** 8.76×10⁴ / 0.0254 = 3.4488×10⁶ (published, rounded: 3.45×10⁶ [pub]). */
  mpy: (10 * HOURS_PER_YEAR) / MM_PER_MIL,
  /** 8.76×10⁷ [mem]. */
  umPerYear: 10_000 * HOURS_PER_YEAR,
  /** mg/(dm²·d): 1000 mg/g × 100 cm²/dm² × 24 h/d = 2.40×10⁶, times D in the G1 form [mem]. */
  mddTimesDensity: 1000 * 100 * 24,
  /** g/(m²·h): 10⁴ cm²/m² = 1.00×10⁴, times D in the G1 form [mem]. */
  gPerM2PerHourTimesDensity: 10_000,
} as const;

/* ---------------------------------------------------------------- rates */

/** Rate units Wallcast can show. mdd = mg/(dm²·day); the mass-based ones need a density. */
export type RateUnit = "mm/y" | "mpy" | "um/y" | "ipy" | "mdd" | "g/m2/h";

export const RATE_UNITS: readonly RateUnit[] = ["mm/y", "mpy", "um/y", "ipy", "mdd", "g/m2/h"];

export function mmPerYearToMpy(mmPerYear: number): number {
  return mmPerYear / MM_PER_MIL;
}

export function mpyToMmPerYear(mpy: number): number {
  return mpy * MM_PER_MIL;
}

/**
 * How many of `unit` one mm/y is, for a metal of density `densityGcm3`.
 * Mass-based units use the 8760-hour (365-day) year [der]: 1 mm/y removes
 * 0.1 cm × D g/cm³ = 0.1·D g/cm² a year = 0.1·D × 1000 mg × 100 per dm² =
 * D·10⁴ mg/dm² a year, so D·10⁴/365 mdd (the code: D × 2.4×10⁶ / 8.76×10⁴ =
 * D × 27.40 = D·10⁴/365); and 0.1·D g/cm² × 10⁴ cm²/m² / 8760 h = D/8.76 g/(m²·h).
 */
function perMmPerYear(unit: RateUnit, densityGcm3: number | undefined): number {
  switch (unit) {
    case "mm/y":
      return 1;
    case "mpy":
      return 1 / MM_PER_MIL;
    case "um/y":
      return 1000;
    case "ipy":
      return 1 / MM_PER_INCH;
    case "mdd":
      return (requirePositive("densityGcm3", densityGcm3) * K_CONSTANTS.mddTimesDensity) / K_CONSTANTS.mmPerYear;
    case "g/m2/h":
      return (
        (requirePositive("densityGcm3", densityGcm3) * K_CONSTANTS.gPerM2PerHourTimesDensity) / K_CONSTANTS.mmPerYear
      );
  }
}

/**
 * Converts a corrosion rate between any two rate units. `densityGcm3` is
 * required when either unit is mass-based (mdd, g/(m²·h)).
 */
export function convertRate(value: number, from: RateUnit, to: RateUnit, densityGcm3?: number): number {
  requireFinite("value", value);
  requireOneOf("from", from, RATE_UNITS);
  requireOneOf("to", to, RATE_UNITS);
  if (from === to) return value;
  return (value / perMmPerYear(from, densityGcm3)) * perMmPerYear(to, densityGcm3);
}

/* ---------------------------------------------------------------- lengths and pressures */

export function mmToInch(mm: number): number {
  return mm / MM_PER_INCH;
}

export function inchToMm(inch: number): number {
  return inch * MM_PER_INCH;
}

export function mpaToPsi(mpa: number): number {
  return mpa / MPA_PER_PSI;
}

export function psiToMpa(psi: number): number {
  return psi * MPA_PER_PSI;
}

/* ---------------------------------------------------------------- display */

/** The user's choice of display units. Storage and computation stay SI. */
export type UnitSystem = "SI" | "US";

const UNIT_SYSTEMS: readonly UnitSystem[] = ["SI", "US"];

/** What a displayed number measures. */
export type DisplayQuantity = "rate" | "thickness" | "pressure";

/** Unit labels per system, so every number on screen carries its unit. */
export const UNIT_LABELS: Readonly<Record<UnitSystem, Readonly<Record<DisplayQuantity, string>>>> = {
  SI: { rate: "mm/y", thickness: "mm", pressure: "MPa" },
  US: { rate: "mpy", thickness: "in", pressure: "psi" },
};

/** The label of `quantity` in `system`, e.g. unitLabel("rate", "US") === "mpy". */
export function unitLabel(quantity: DisplayQuantity, system: UnitSystem): string {
  requireOneOf("quantity", quantity, ["rate", "thickness", "pressure"] as const);
  requireOneOf("system", system, UNIT_SYSTEMS);
  return UNIT_LABELS[system][quantity];
}

/**
 * Converts an SI value (mm/y, mm, MPa) to the user's system: mpy, in, psi
 * for "US"; unchanged for "SI".
 */
export function toDisplay(quantity: DisplayQuantity, siValue: number, system: UnitSystem): number {
  requireFinite("siValue", siValue);
  requireOneOf("system", system, UNIT_SYSTEMS);
  if (system === "SI") {
    requireOneOf("quantity", quantity, ["rate", "thickness", "pressure"] as const);
    return siValue;
  }
  switch (quantity) {
    case "rate":
      return mmPerYearToMpy(siValue);
    case "thickness":
      return mmToInch(siValue);
    case "pressure":
      return mpaToPsi(siValue);
    default:
      throw rangeError("quantity", 'one of "rate", "thickness", "pressure"', quantity);
  }
}

/** The inverse of toDisplay: a value typed in the user's system back to SI. */
export function fromDisplay(quantity: DisplayQuantity, displayValue: number, system: UnitSystem): number {
  requireFinite("displayValue", displayValue);
  requireOneOf("system", system, UNIT_SYSTEMS);
  if (system === "SI") {
    requireOneOf("quantity", quantity, ["rate", "thickness", "pressure"] as const);
    return displayValue;
  }
  switch (quantity) {
    case "rate":
      return mpyToMmPerYear(displayValue);
    case "thickness":
      return inchToMm(displayValue);
    case "pressure":
      return psiToMpa(displayValue);
    default:
      throw rangeError("quantity", 'one of "rate", "thickness", "pressure"', quantity);
  }
}

/** A value with its unit label, ready for a table cell. */
export function displayValue(
  quantity: DisplayQuantity,
  siValue: number,
  system: UnitSystem,
): { value: number; unit: string } {
  return { value: toDisplay(quantity, siValue, system), unit: unitLabel(quantity, system) };
}
