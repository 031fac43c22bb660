/**
 * Piping circuits: required thickness, thickness rates per CML, remaining
 * life and the next thickness inspection.
 *
 * Standards:
 * - ASME B31.3 §304.1.2 eq. (3a): t = P·D / (2(S·E·W + P·Y)), valid for
 *   t < D/6 and P/(S·E) ≤ 0.385 [pub]; Table 304.1.1 Y coefficients
 *   (ferritic steels below 482 °C: 0.4 [pub], the rest of the table [mem]).
 * - API 574: structural minimum thickness of carbon-steel pipe ≤ 205 °C by
 *   NPS [mem].
 * - API 570: required thickness = max(pressure design, structural minimum)
 *   [pub]; long-term and short-term corrosion rates per CML; remaining life
 *   = (t_actual − t_required) / rate [pub]; next thickness inspection =
 *   min(½ remaining life, class maximum) with class 1: 5 y, classes 2 and
 *   3: 10 y [pub], injection points: 3 y [mem]; class 4 has no class
 *   maximum (half-life or the owner's maximum).
 *
 * Thickness rates use years of 365.25 days between calendar dates (whole
 * days). A wall that grew between surveys is a measurement artefact: the
 * rate is 0 and `grew` is true, never a negative rate [cp].
 */

import { DAYS_PER_YEAR_THICKNESS } from "./units.ts";
import { addCalendarYears, formatIsoDay, parseIsoDay } from "./dates.ts";
import {
  rangeError,
  requireFinite,
  requireInClosed,
  requireInHalfOpen,
  requireNonNegative,
  requireObject,
  requireOneOf,
  requirePositive,
  FieldRangeError,
} from "./validate.ts";

/* ---------------------------------------------------------------- pressure design */

export interface PressureDesignInput {
  /** Internal design gauge pressure P, MPa. */
  pressureMPa: number;
  /** Outside diameter D, mm. */
  outsideDiameterMm: number;
  /** Allowable stress S at design temperature, MPa. */
  allowableStressMPa: number;
  /** Longitudinal weld joint quality factor E, (0, 1]. */
  jointEfficiency: number;
  /** Weld joint strength reduction factor W, (0, 1]. */
  weldStrengthFactor: number;
  /** Coefficient Y from B31.3 Table 304.1.1, [0, 1). */
  yCoefficient: number;
}

/** The limit on P/(S·E) beyond which B31.3 §304.1.2(b) asks for special consideration [pub]. */
const PRESSURE_RATIO_LIMIT = 0.385;

/**
 * Pressure design thickness for internal pressure, ASME B31.3 eq. (3a), mm.
 * B31.3 §304.1.2(b): where t ≥ D/6 or P/(S·E) > 0.385, the equation needs
 * special consideration (design theory, fatigue, thermal stress). Either
 * condition throws a FieldRangeError on `pressureMPa` whose message names
 * the condition(s) met, with their numbers.
 */
export function pressureDesignThickness(input: PressureDesignInput): number {
  requireObject("input", input);
  const P = requirePositive("pressureMPa", input.pressureMPa);
  const D = requirePositive("outsideDiameterMm", input.outsideDiameterMm);
  const S = requirePositive("allowableStressMPa", input.allowableStressMPa);
  const E = requireInHalfOpen("jointEfficiency", input.jointEfficiency, 0, 1);
  const W = requireInHalfOpen("weldStrengthFactor", input.weldStrengthFactor, 0, 1);
  const Y = input.yCoefficient;
  if (typeof Y !== "number" || !(Y >= 0) || !(Y < 1)) throw rangeError("yCoefficient", ">= 0 and < 1", Y);
  const t = (P * D) / (2 * (S * E * W + P * Y));
  const ratio = P / (S * E);
  const reasons: string[] = [];
  if (t >= D / 6) reasons.push(`t = ${t} mm reaches D/6 = ${D / 6} mm`);
  if (ratio > PRESSURE_RATIO_LIMIT) reasons.push(`P/(S·E) = ${ratio} is above ${PRESSURE_RATIO_LIMIT}`);
  if (reasons.length > 0) {
    throw new FieldRangeError(
      "pressureMPa",
      `pressureMPa must give t < outsideDiameterMm/6 and P/(S·E) <= ${PRESSURE_RATIO_LIMIT} for B31.3 eq. (3a) (got ${P}: ` +
        `${reasons.join("; ")}); B31.3 §304.1.2(b) requires special consideration of this design`,
    );
  }
  return t;
}

/* ---------------------------------------------------------------- Y coefficient */

/** Material groups of ASME B31.3 Table 304.1.1. */
export type YMaterialGroup = "ferritic-steel" | "austenitic-steel" | "nickel-alloy" | "gray-iron" | "other-ductile";

export const Y_MATERIAL_GROUPS: readonly YMaterialGroup[] = [
  "ferritic-steel",
  "austenitic-steel",
  "nickel-alloy",
  "gray-iron",
  "other-ductile",
];

/**
 * ASME B31.3 Table 304.1.1, Y for t < D/6. Eight columns of design
 * temperature in °C: ≤ 482, 510, 538, 566, 593, 621, 649, ≥ 677
 * (≤ 900 … ≥ 1250 °F). "nickel-alloy" is the table's row for UNS N06617,
 * N08800, N08810 and N08825. Ferritic steels at ≤ 482 °C: 0.4 [pub]; every
 * other entry is recalled from memory [mem] — confirm against a licensed
 * copy before calling it normative.
 */
export const Y_COEFFICIENT_TABLE = {
  temperaturesC: [482, 510, 538, 566, 593, 621, 649, 677],
  rows: {
    "ferritic-steel": [0.4, 0.5, 0.7, 0.7, 0.7, 0.7, 0.7, 0.7],
    "austenitic-steel": [0.4, 0.4, 0.4, 0.4, 0.5, 0.7, 0.7, 0.7],
    "nickel-alloy": [0.4, 0.4, 0.4, 0.4, 0.4, 0.4, 0.5, 0.7],
    "gray-iron": [0, 0, 0, 0, 0, 0, 0, 0],
    "other-ductile": [0.4, 0.4, 0.4, 0.4, 0.4, 0.4, 0.4, 0.4],
  } as Readonly<Record<YMaterialGroup, readonly number[]>>,
  source:
    "ASME B31.3 Table 304.1.1 (ferritic ≤ 482 °C: 0.4 [pub]; other entries, incl. the nickel-alloy row N06617/N08800/N08810/N08825, [mem]); linear interpolation between columns as the table's note allows [mem]",
} as const;

/**
 * The B31.3 Y coefficient for a material group at a design temperature,
 * interpolated linearly between the table's temperature columns; constant
 * below the first and above the last column. Valid only for t < D/6.
 */
export function yCoefficient(input: { materialGroup: YMaterialGroup; designTemperatureC: number }): number {
  requireObject("input", input);
  const group = requireOneOf("materialGroup", input.materialGroup, Y_MATERIAL_GROUPS);
  const T = requireInClosed("designTemperatureC", input.designTemperatureC, -273.15, 1000);
  const temps = Y_COEFFICIENT_TABLE.temperaturesC;
  const row = Y_COEFFICIENT_TABLE.rows[group];
  if (T <= temps[0]) return row[0];
  for (let i = 1; i < temps.length; i++) {
    if (T <= temps[i]) {
      const f = (T - temps[i - 1]) / (temps[i] - temps[i - 1]);
      return row[i - 1] + f * (row[i] - row[i - 1]);
    }
  }
  return row[row.length - 1];
}

/* ---------------------------------------------------------------- structural minimum */

/** Standard nominal pipe sizes the structural-minimum table covers (NPS ½ to 24). */
export const STANDARD_NPS: readonly number[] = [
  0.5, 0.75, 1, 1.25, 1.5, 2, 2.5, 3, 3.5, 4, 5, 6, 8, 10, 12, 14, 16, 18, 20, 22, 24,
];

/**
 * API 574 structural minimum thickness, carbon steel at ≤ 205 °C (400 °F)
 * [mem]. Rows by NPS range; the inch values are the table's, the mm values
 * their usual metric rounding.
 */
export const STRUCTURAL_MINIMUM_CS = [
  { fromNps: 0.5, toNps: 2, thicknessMm: 1.78, thicknessIn: 0.07 },
  { fromNps: 3, toNps: 3, thicknessMm: 2.03, thicknessIn: 0.08 },
  { fromNps: 4, toNps: 4, thicknessMm: 2.29, thicknessIn: 0.09 },
  { fromNps: 6, toNps: 18, thicknessMm: 2.79, thicknessIn: 0.11 },
  { fromNps: 20, toNps: 24, thicknessMm: 3.05, thicknessIn: 0.12 },
] as const;

export const STRUCTURAL_MINIMUM_SOURCE =
  "API 574 structural minimum thickness, carbon steel ≤ 205 °C [mem]; sizes between rows (NPS 2½, 3½, 5) take the next larger row [cp, conservative]";

/**
 * Structural minimum thickness of a carbon-steel pipe by NPS, mm (API 574).
 * NPS 2½, 3½ and 5 fall between table rows and take the next larger row's
 * (greater) value. Sizes outside ½–24 or non-standard sizes throw: the
 * owner must then give the structural minimum explicitly.
 */
export function structuralMinimumThickness(nps: number): number {
  if (typeof nps !== "number" || !STANDARD_NPS.includes(nps)) {
    throw rangeError("nps", `a standard size from 0.5 to 24 (${STANDARD_NPS.join(", ")})`, nps);
  }
  for (const row of STRUCTURAL_MINIMUM_CS) if (nps <= row.toNps) return row.thicknessMm;
  // Unreachable while STANDARD_NPS ends at the last row's upper bound; kept so a table edit cannot return undefined.
  throw rangeError("nps", "<= 24", nps);
}

/* ---------------------------------------------------------------- circuit required thickness */

export interface CircuitRequiredThicknessInput extends PressureDesignInput {
  /** Nominal pipe size, for the API 574 carbon-steel structural minimum. */
  nps?: number;
  /** The owner's structural minimum, mm; when given it is used instead of the API 574 table. */
  structuralMinimumMm?: number;
}

export interface CircuitRequiredThickness {
  requiredMm: number;
  pressureDesignMm: number;
  structuralMinimumMm: number;
  /** Which term is the larger; on a tie the pressure design governs. */
  governedBy: "pressure-design" | "structural-minimum";
  /** The reason in words, for the outlook and reports. */
  reason: string;
}

/**
 * Required thickness of a circuit (API 570): the greater of the B31.3
 * pressure design thickness and the structural minimum, with the reason.
 */
export function circuitRequiredThickness(input: CircuitRequiredThicknessInput): CircuitRequiredThickness {
  requireObject("input", input);
  const pressureDesignMm = pressureDesignThickness(input);
  let structuralMinimumMm: number;
  let structuralSource: string;
  if (input.structuralMinimumMm !== undefined) {
    structuralMinimumMm = requirePositive("structuralMinimumMm", input.structuralMinimumMm);
    structuralSource = "the owner's structural minimum";
  } else if (input.nps !== undefined) {
    structuralMinimumMm = structuralMinimumThickness(input.nps);
    structuralSource = `the API 574 structural minimum for NPS ${input.nps} carbon steel`;
  } else {
    throw rangeError("nps", "given (or structuralMinimumMm) to find the structural minimum", input.nps);
  }
  const pressureGoverns = pressureDesignMm >= structuralMinimumMm;
  const pd = pressureDesignMm.toFixed(2);
  const sm = structuralMinimumMm.toFixed(2);
  return {
    requiredMm: pressureGoverns ? pressureDesignMm : structuralMinimumMm,
    pressureDesignMm,
    structuralMinimumMm,
    governedBy: pressureGoverns ? "pressure-design" : "structural-minimum",
    reason: pressureGoverns
      ? `Pressure design thickness ${pd} mm (ASME B31.3 eq. 3a) is not less than ${structuralSource}, ${sm} mm.`
      : `${capitalise(structuralSource)}, ${sm} mm, exceeds the pressure design thickness ${pd} mm (ASME B31.3 eq. 3a).`,
  };
}

function capitalise(text: string): string {
  return text.charAt(0).toUpperCase() + text.slice(1);
}

/* ---------------------------------------------------------------- thickness rates */

export interface ThicknessReading {
  /** Survey date, "YYYY-MM-DD". */
  date: string;
  /** Measured wall thickness, mm. */
  thicknessMm: number;
}

export interface ThicknessRates {
  longTermMmPerYear: number;
  shortTermMmPerYear: number;
  /** True when the wall grew over the long-term or short-term span (that rate is then reported as 0). */
  grew: boolean;
}

/**
 * Long-term and short-term corrosion rates of one CML (API 570), mm/y on
 * 365.25-day years between calendar dates.
 * - long-term: from `initial` (else the first reading) to the last reading;
 * - short-term: from the reading before the last to the last.
 * Readings must be oldest first with strictly increasing dates; `initial`
 * may not be later than the first reading. A thickness that grew over a
 * span gives a rate of 0 for that span and `grew: true`.
 */
export function thicknessRates(readings: ThicknessReading[], initial?: ThicknessReading): ThicknessRates {
  if (!Array.isArray(readings)) throw rangeError("readings", "an array of { date, thicknessMm }", readings);
  const n = readings.length;
  if (n < 2) throw new FieldRangeError("readings", `readings must have at least 2 readings (got ${n})`);

  let previousDay = 0;
  let previousThickness = 0;
  let lastDay = 0;
  let lastThickness = 0;
  let firstDay = 0;
  let firstThickness = 0;
  for (let i = 0; i < n; i++) {
    const r = readings[i];
    if (r === null || typeof r !== "object") throw rangeError(`readings[${i}]`, "an object { date, thicknessMm }", r);
    const day = parseIsoDay(`readings[${i}].date`, r.date);
    const t = r.thicknessMm;
    if (typeof t !== "number" || !(t > 0) || t === Infinity) requirePositive(`readings[${i}].thicknessMm`, t);
    if (i === 0) {
      firstDay = day;
      firstThickness = t;
    } else if (day <= lastDay) {
      throw new FieldRangeError(
        "readings",
        `readings[${i}].date must be later than readings[${i - 1}].date ${readings[i - 1].date} (got "${r.date}"): ` +
          "readings go oldest first, one per day",
      );
    }
    previousDay = lastDay;
    previousThickness = lastThickness;
    lastDay = day;
    lastThickness = t;
  }

  let startDay = firstDay;
  let startThickness = firstThickness;
  if (initial !== undefined) {
    if (initial === null || typeof initial !== "object")
      throw rangeError("initial", "an object { date, thicknessMm }", initial);
    startDay = parseIsoDay("initial.date", initial.date);
    startThickness = requirePositive("initial.thicknessMm", initial.thicknessMm);
    if (startDay > firstDay) {
      throw new FieldRangeError(
        "initial.date",
        `initial.date must be on or before readings[0].date ${readings[0].date} (got "${initial.date}")`,
      );
    }
  }

  const longLoss = startThickness - lastThickness;
  const shortLoss = previousThickness - lastThickness;
  const longYears = (lastDay - startDay) / DAYS_PER_YEAR_THICKNESS;
  const shortYears = (lastDay - previousDay) / DAYS_PER_YEAR_THICKNESS;
  return {
    longTermMmPerYear: longLoss > 0 ? longLoss / longYears : 0,
    shortTermMmPerYear: shortLoss > 0 ? shortLoss / shortYears : 0,
    grew: longLoss < 0 || shortLoss < 0,
  };
}

/* ---------------------------------------------------------------- remaining life */

/**
 * Remaining life in years (API 570): (actual − required) / rate.
 * 0 when the actual thickness is at or below the required (checked first);
 * Infinity when the rate is 0 or negative (no measurable loss).
 */
export function remainingLife(input: { actualMm: number; requiredMm: number; rateMmPerYear: number }): number {
  requireObject("input", input);
  const actual = input.actualMm;
  const required = input.requiredMm;
  const rate = input.rateMmPerYear;
  if (typeof actual !== "number" || !(actual >= 0) || actual === Infinity) requireNonNegative("actualMm", actual);
  if (typeof required !== "number" || !(required >= 0) || required === Infinity)
    requireNonNegative("requiredMm", required);
  if (typeof rate !== "number" || !Number.isFinite(rate)) requireFinite("rateMmPerYear", rate);
  if (actual <= required) return 0;
  if (rate <= 0) return Infinity;
  return (actual - required) / rate;
}

/* ---------------------------------------------------------------- next inspection */

export type PipingClass = 1 | 2 | 3 | 4 | "injection";

export const PIPING_CLASSES: readonly PipingClass[] = [1, 2, 3, 4, "injection"];

/**
 * Maximum thickness-inspection interval by piping class, years (API 570):
 * class 1: 5, classes 2 and 3: 10 [pub]; injection points: 3 [mem];
 * class 4: no class maximum (Infinity) — half-life or the owner's maximum.
 */
export const CLASS_MAXIMUM_INTERVAL_YEARS: Readonly<Record<string, number>> = {
  "1": 5,
  "2": 10,
  "3": 10,
  "4": Infinity,
  injection: 3,
};

export interface NextInspectionInput {
  /** Remaining life, years (≥ 0, Infinity allowed). */
  remainingLifeYears: number;
  pipingClass: PipingClass;
  /** Date of the survey the remaining life comes from, "YYYY-MM-DD". */
  inspectedOn: string;
  /** The owner's maximum interval, years; it only ever tightens the interval. */
  maxIntervalYears?: number;
}

export interface NextInspection {
  intervalYears: number;
  /** inspectedOn + intervalYears calendar years when the interval is whole years, else + floor(intervalYears × 365.25) days. */
  dueOn: string;
  /** "class-maximum" when the maximum (class or owner's) is the smaller, or they tie. */
  governedBy: "half-life" | "class-maximum";
}

/** The last day formatIsoDay can write, 9999-12-31. */
const LAST_DAY_NUMBER = parseIsoDay("last day", "9999-12-31");

/**
 * Next thickness inspection (API 570): interval = min(½ remaining life,
 * class maximum, owner's maximum if given); due date = inspectedOn plus the
 * interval: whole years as calendar years (10 years after 2026-03-01 is
 * 2036-03-01), a fractional interval as floor(interval × 365.25) whole days. Class 4 with infinite remaining life
 * and no owner's maximum throws (no interval can be derived).
 */
export function nextInspection(input: NextInspectionInput): NextInspection {
  requireObject("input", input);
  const life = input.remainingLifeYears;
  if (typeof life !== "number" || !(life >= 0)) throw rangeError("remainingLifeYears", ">= 0 (Infinity allowed)", life);
  const pipingClass = input.pipingClass;
  let classMaximum: number;
  switch (pipingClass) {
    case 1:
      classMaximum = 5;
      break;
    case 2:
    case 3:
      classMaximum = 10;
      break;
    case 4:
      classMaximum = Infinity;
      break;
    case "injection":
      classMaximum = 3;
      break;
    default:
      throw rangeError("pipingClass", 'one of 1, 2, 3, 4, "injection"', pipingClass);
  }
  const day = parseIsoDay("inspectedOn", input.inspectedOn);
  let maximum = classMaximum;
  const owner = input.maxIntervalYears;
  if (owner !== undefined) {
    if (typeof owner !== "number" || !(owner > 0) || owner === Infinity) requirePositive("maxIntervalYears", owner);
    if (owner < maximum) maximum = owner;
  }
  const halfLife = life / 2;
  if (maximum === Infinity && halfLife === Infinity) {
    throw new FieldRangeError(
      "maxIntervalYears",
      "maxIntervalYears must be given for pipingClass 4 when remainingLifeYears is Infinity (got undefined): no interval can be derived",
    );
  }
  const byMaximum = maximum <= halfLife;
  const intervalYears = byMaximum ? maximum : halfLife;
  // Whole years are calendar years (same month and day); a fractional interval is whole days.
  const startYear = Number(input.inspectedOn.slice(0, 4));
  const dueDay = !Number.isInteger(intervalYears)
    ? day + Math.floor(intervalYears * DAYS_PER_YEAR_THICKNESS)
    : startYear + intervalYears > 9999
      ? LAST_DAY_NUMBER + 1
      : addCalendarYears(day, intervalYears);
  if (dueDay > LAST_DAY_NUMBER) {
    throw new FieldRangeError(
      "remainingLifeYears",
      `remainingLifeYears must give a due date by 9999-12-31 (got ${life}): set maxIntervalYears for class 4 circuits`,
    );
  }
  return { intervalYears, dueOn: formatIsoDay(dueDay), governedBy: byMaximum ? "class-maximum" : "half-life" };
}
