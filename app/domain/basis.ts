/**
 * The calculation basis every stored result carries, so that a number can
 * be re-derived years later: formula version, constants, unit basis, year
 * basis, the mm/y → mpy path and the density with its source.
 *
 * Standards named in the record: ASTM G1, G31, G46, G59, G102; NACE SP0775;
 * API 570, API 574; ASME B31.3 §304.1.2.
 *
 * Bump FORMULA_VERSION whenever a formula, constant or rule changes what a
 * function returns; stored results keep the version they were computed with.
 */

import { K1_MM_G_PER_UA_CM_Y, K2_G_CM2_PER_UA_M2_D } from "./electrochemistry.ts";
import { REGRESSION_METHOD } from "./regression.ts";
import {
  DAYS_PER_YEAR_THICKNESS,
  FARADAY_C_PER_MOL,
  HOURS_PER_YEAR,
  K_CONSTANTS,
  MM_PER_INCH,
  MM_PER_MIL,
  MPA_PER_PSI,
} from "./units.ts";
import { requireObject, requirePositive, rangeError } from "./validate.ts";

/** The published, rounded ASTM G1 mpy constant: recorded in the basis for the reader, never computed with [pub]. */
const K_MPY_PUBLISHED_ROUNDED = 3.45e6;

export const FORMULA_VERSION = "wallcast-calc 1.3.0";

export interface CalculationBasis {
  formulaVersion: string;
  /** Units of every stored input and result. */
  unitBasis: {
    length: "mm";
    mass: "g";
    area: "cm²";
    time: "h";
    density: "g/cm³";
    pressure: "MPa";
    temperature: "°C";
    rate: "mm/y";
  };
  yearBasis: {
    /** Coupon, pitting, electrochemical and anode rates: the ASTM G1 year. */
    ratesHoursPerYear: number;
    /** Thickness rates and due dates: years of this many days between calendar dates. */
    thicknessDaysPerYear: number;
    note: string;
  };
  /** How mm/y becomes mpy on every screen and report. */
  mmPerYearToMpy: { path: "exact"; divisorMmPerMil: number; note: string };
  constants: {
    kMmPerYear: number;
    kMpy: number;
    kMpyPublishedRounded: number;
    kUmPerYear: number;
    kMddTimesDensity: number;
    kGPerM2PerHourTimesDensity: number;
    faradayCPerMol: number;
    k1MmGPerUACmY: number;
    k2GCm2PerUAM2D: number;
    sternGearyLogFactor: number;
    mmPerInch: number;
    mpaPerPsi: number;
  };
  /** The density used and where it came from; null for results that do not use one (e.g. thickness rates). */
  density: { densityGcm3: number; source: string } | null;
  severityRule: string;
  regressionMethod: string;
  standards: string[];
}

/**
 * The basis record for a result. Pass the density (and its source) for
 * coupon and electrochemical results; omit it for thickness and piping
 * results. The record is a fresh, JSON-serialisable object.
 */
export function calculationBasis(density?: { densityGcm3: number; source: string }): CalculationBasis {
  let densityRecord: CalculationBasis["density"] = null;
  if (density !== undefined) {
    requireObject("density", density);
    const value = requirePositive("densityGcm3", density.densityGcm3);
    if (typeof density.source !== "string" || density.source.trim() === "") {
      throw rangeError("source", "a non-empty description of where the density comes from", density.source);
    }
    densityRecord = { densityGcm3: value, source: density.source };
  }
  return {
    formulaVersion: FORMULA_VERSION,
    unitBasis: {
      length: "mm",
      mass: "g",
      area: "cm²",
      time: "h",
      density: "g/cm³",
      pressure: "MPa",
      temperature: "°C",
      rate: "mm/y",
    },
    yearBasis: {
      ratesHoursPerYear: HOURS_PER_YEAR,
      thicknessDaysPerYear: DAYS_PER_YEAR_THICKNESS,
      note:
        "Coupon, pitting and electrochemical rates use the 8760-hour year of ASTM G1 (a 365.25-day year would give 0.07 % more); " +
        "thickness rates use 365.25-day years between survey dates, and due dates add whole intervals as calendar years, fractional ones as floor(interval × 365.25) days.",
    },
    mmPerYearToMpy: {
      path: "exact",
      divisorMmPerMil: MM_PER_MIL,
      note: "mpy = mm/y ÷ 0.0254 exactly (1 mil = 0.0254 mm); the rounded K ratio 3.45×10⁶ / 8.76×10⁴ = 39.38 (0.03 % high) is not used.",
    },
    constants: {
      kMmPerYear: K_CONSTANTS.mmPerYear,
      kMpy: K_CONSTANTS.mpy,
      kMpyPublishedRounded: K_MPY_PUBLISHED_ROUNDED,
      kUmPerYear: K_CONSTANTS.umPerYear,
      kMddTimesDensity: K_CONSTANTS.mddTimesDensity,
      kGPerM2PerHourTimesDensity: K_CONSTANTS.gPerM2PerHourTimesDensity,
      faradayCPerMol: FARADAY_C_PER_MOL,
      k1MmGPerUACmY: K1_MM_G_PER_UA_CM_Y,
      k2GCm2PerUAM2D: K2_G_CM2_PER_UA_M2_D,
      sternGearyLogFactor: Math.LN10,
      mmPerInch: MM_PER_INCH,
      mpaPerPsi: MPA_PER_PSI,
    },
    density: densityRecord,
    severityRule:
      "NACE SP0775 bands, carbon steel (other materials only with the owner's thresholds for their family), compared in mpy after exact conversion: general low < 1 ≤ moderate < 5 ≤ high ≤ 10 < severe; " +
      "pitting low < 5 ≤ moderate < 8 ≤ high ≤ 15 < severe; owner thresholds in mm/y take the same shape.",
    regressionMethod: REGRESSION_METHOD,
    standards: [
      "ASTM G1 §7, §8",
      "ASTM G31",
      "ASTM G46",
      "ASTM G59",
      "ASTM G102",
      "NACE SP0775",
      "API 570",
      "API 574",
      "ASME B31.3 §304.1.2",
    ],
  };
}
