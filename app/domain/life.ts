/**
 * Remaining life of CMLs and circuits, and the next thickness inspection.
 *
 * Standards: API 570 (long-term and short-term rates per CML, remaining life
 * = (t_actual − t_required) / rate, interval = min(½ remaining life, class
 * maximum) [pub]; injection points 3 y [mem]); ASME B31.3 eq. (3a) and the
 * API 574 structural minimum through `circuitRequiredThickness`; NIST/SEMATECH
 * §4.1.4.1 for the regression rate and its upper bound.
 *
 * The base-line of a CML is the start of its long-term rate: the CML's stated
 * base-line thickness (the replacement's after a component was replaced), else
 * the nominal wall less the mill under-tolerance, t_nom × (1 − tol/100) — the
 * thinnest wall the pipe may have been delivered with [pub: mill tolerance;
 * cp: using it as a base-line]. Its date is the stated base-line date (the
 * replacement date), else the first reading's date. The regression fits the
 * measured readings only (a base-line may be a nominal figure).
 *
 * A wall that reads thicker than before never gives a negative rate: the rate
 * is 0 [cp], and the owner's stated minimum rate (when set) is a floor under
 * every governing rate, so "no loss" has a finite life. Without it no remaining
 * life is stated and the next inspection comes from the class or owner maximum.
 */

import { addCalendarYears, formatIsoDay, parseIsoDay } from "./dates.ts";
import { nextInspection, remainingLife, thicknessRates } from "./piping.ts";
import type { PipingClass, ThicknessReading } from "./piping.ts";
import { thicknessQualityFlags } from "./quality.ts";
import type { QualityFlag, ThicknessFlagCode } from "./quality.ts";
import { conservativeRemainingLife, regressionRate, REGRESSION_METHOD } from "./regression.ts";
import type { RegressionRate } from "./regression.ts";
import { DAYS_PER_YEAR_THICKNESS } from "./units.ts";
import { FORMULA_VERSION } from "./basis.ts";
import {
  FieldRangeError,
  rangeError,
  requireInClosed,
  requireObject,
  requireOneOf,
  requirePositive,
} from "./validate.ts";

/* ---------------------------------------------------------------- policy and words */

export type RatePolicyName = "greater_of_long_short" | "regression_upper";
export const RATE_POLICIES: readonly RatePolicyName[] = ["greater_of_long_short", "regression_upper"];

export interface RatePolicy {
  policy: RatePolicyName;
  /** The owner's stated minimum rate, mm/y: a floor under every governing rate (no loss and growth included). */
  minimumRateMmPerYear?: number;
}

export type LifeCondition = "assessed" | "below_required" | "no_loss" | "no_data";

export type GoverningRateName =
  "long-term" | "short-term" | "regression-upper" | "stated-minimum" | "coupon-general" | "coupon-pitting";

export type NextInspectionGovernedBy = "half-life" | "class-maximum" | "injection-point" | "owner-maximum";

/** The one sentence for a wall at or below its required thickness (never "0 years" alone). */
export const BELOW_REQUIRED_WORDS = "Below required thickness — fitness-for-service assessment or repair needed.";

/** Days ahead in which a due inspection is "due soon" [cp]. */
export const DUE_SOON_DAYS = 90;

/* ---------------------------------------------------------------- one CML */

export interface CmlLifeInput {
  /** Approved readings after the latest replacement, oldest first, one per day. */
  readings: ThicknessReading[];
  /** The stated base-line (CML's or replacement's); thickness null → nominal less mill tolerance. */
  baseline?: { thicknessMm: number | null; date: string | null };
  /** Nominal wall, mm, and mill under-tolerance, %, for the base-line when none is stated. */
  nominalWallMm?: number | null;
  millTolerancePct?: number | null;
  /** Required thickness, mm (circuitRequiredThickness); null when the circuit's design data is missing. */
  requiredMm: number | null;
  /** Why requiredMm is null, in words. */
  requiredMissingReason?: string;
  policy: RatePolicy;
  /** API 570 piping class; null when not set (no interval can then be derived). */
  pipingClass: 1 | 2 | 3 | 4 | null;
  injectionPoint: boolean;
  /** The owner's maximum interval, years. */
  maxIntervalYears?: number;
  /** The computation's day, "YYYY-MM-DD" (readings after it are refused). */
  today: string;
}

export interface NextInspectionResult {
  dueOn: string | null;
  intervalYears: number | null;
  governedBy: NextInspectionGovernedBy | null;
  /** Why no date, in words. */
  note: string | null;
}

export interface CmlLife {
  condition: LifeCondition;
  readingsUsed: number;
  lastMeasuredOn: string | null;
  lastThicknessMm: number | null;
  baseline: { thicknessMm: number; date: string; source: "stated" | "nominal-less-mill-tolerance" } | null;
  longTermMmPerYear: number | null;
  shortTermMmPerYear: number | null;
  regression: Pick<
    RegressionRate,
    "mmPerYear" | "lowerMmPerYear" | "upperMmPerYear" | "confidence" | "n" | "rSquared" | "grew"
  > | null;
  governingRateMmPerYear: number | null;
  governingRate: GoverningRateName | null;
  /** Point estimate, years (regression best estimate when available, else the governing rate's). */
  remainingLifeYears: number | null;
  /** The figure decisions use: the governing rate's life, or the regression upper bound's when shorter. */
  remainingLifeConservativeYears: number | null;
  /** Why a figure is null, or how it was made, in words. */
  lifeNote: string | null;
  asOf: string | null;
  projectedRequiredOn: string | null;
  nextInspection: NextInspectionResult;
  flags: QualityFlag<ThicknessFlagCode | LifeFlagCode>[];
  basis: {
    formulaVersion: string;
    policy: RatePolicy;
    requiredMm: number | null;
    pipingClass: PipingClass | null;
    maxIntervalYears: number | null;
    baseline: string;
    rateNote: string;
    regressionMethod: string | null;
    daysPerYear: number;
  };
}

export type LifeFlagCode =
  | "baseline-after-readings"
  | "baseline-undated"
  | "coupon-thickness-disagree"
  | "coupon-based-estimate"
  | "design-data-missing";

const BASELINE_RULE =
  "Base-line: the CML's stated base-line (or the replacement's) at its date, else nominal wall × (1 − mill under-tolerance) at the first reading's date; it starts the long-term rate.";

const round = (v: number, places: number) => Number(v.toFixed(places));

/** The validated policy (the stated minimum > 0 when given). */
function checkPolicy(policy: RatePolicy): RatePolicy {
  requireObject("policy", policy);
  const name = requireOneOf("policy.policy", policy.policy, RATE_POLICIES);
  if (policy.minimumRateMmPerYear === undefined) return { policy: name };
  return {
    policy: name,
    minimumRateMmPerYear: requirePositive("policy.minimumRateMmPerYear", policy.minimumRateMmPerYear),
  };
}

/**
 * The next thickness inspection from a remaining life (API 570 through `nextInspection`),
 * saying which limit governed: the half-life, the class maximum, the injection-point cap
 * (3 y [mem]) or the owner's maximum. Class 4 with no finite life and no owner maximum
 * gives no date, with the reason.
 */
export function lifeNextInspection(input: {
  remainingLifeYears: number;
  pipingClass: 1 | 2 | 3 | 4 | null;
  injectionPoint: boolean;
  inspectedOn: string;
  maxIntervalYears?: number;
}): NextInspectionResult {
  if (input.pipingClass === null && !input.injectionPoint && input.maxIntervalYears === undefined)
    return {
      dueOn: null,
      intervalYears: null,
      governedBy: null,
      note: "The circuit has no piping class: set it (1 to 4) for an inspection interval.",
    };
  const klass: PipingClass = input.injectionPoint ? "injection" : (input.pipingClass ?? 4);
  try {
    const next = nextInspection({
      remainingLifeYears: input.remainingLifeYears,
      pipingClass: klass,
      inspectedOn: input.inspectedOn,
      ...(input.maxIntervalYears !== undefined ? { maxIntervalYears: input.maxIntervalYears } : {}),
    });
    const classMaximum = klass === "injection" ? 3 : klass === 1 ? 5 : klass === 4 ? Infinity : 10;
    let governedBy: NextInspectionGovernedBy = next.governedBy;
    if (next.governedBy === "class-maximum") {
      if (input.maxIntervalYears !== undefined && input.maxIntervalYears < classMaximum) governedBy = "owner-maximum";
      else if (klass === "injection") governedBy = "injection-point";
    }
    return { dueOn: next.dueOn, intervalYears: next.intervalYears, governedBy, note: null };
  } catch (error) {
    if (!(error instanceof FieldRangeError)) throw error;
    return {
      dueOn: null,
      intervalYears: null,
      governedBy: null,
      note:
        input.pipingClass === 4
          ? "Class 4 has no class maximum and no finite remaining life here: set the owner's maximum interval for a date."
          : "No inspection date can be derived from these figures.",
    };
  }
}

/** The day the wall reaches `requiredMm` at `rate` from `actualMm` on `asOf`; null beyond 9999 or at rate 0. */
function projectedDay(asOf: string, years: number): string | null {
  if (!Number.isFinite(years)) return null;
  const day = parseIsoDay("asOf", asOf) + Math.floor(years * DAYS_PER_YEAR_THICKNESS);
  try {
    return formatIsoDay(day);
  } catch {
    return null;
  }
}

function noDataCml(input: CmlLifeInput, policy: RatePolicy, note: string, last?: ThicknessReading): CmlLife {
  return {
    condition: "no_data",
    readingsUsed: input.readings.length,
    lastMeasuredOn: last?.date ?? null,
    lastThicknessMm: last?.thicknessMm ?? null,
    baseline: null,
    longTermMmPerYear: null,
    shortTermMmPerYear: null,
    regression: null,
    governingRateMmPerYear: null,
    governingRate: null,
    remainingLifeYears: null,
    remainingLifeConservativeYears: null,
    lifeNote: note,
    asOf: last?.date ?? null,
    projectedRequiredOn: null,
    nextInspection: { dueOn: null, intervalYears: null, governedBy: null, note },
    flags: [],
    basis: basisOf(input, policy, "no rate: " + note, null),
  };
}

function basisOf(input: CmlLifeInput, policy: RatePolicy, rateNote: string, regression: string | null) {
  return {
    formulaVersion: FORMULA_VERSION,
    policy,
    requiredMm: input.requiredMm,
    pipingClass: (input.injectionPoint ? "injection" : input.pipingClass) as PipingClass | null,
    maxIntervalYears: input.maxIntervalYears ?? null,
    baseline: BASELINE_RULE,
    rateNote,
    regressionMethod: regression,
    daysPerYear: DAYS_PER_YEAR_THICKNESS,
  };
}

/**
 * Remaining life and next inspection of one CML. See the module comment for the
 * base-line and the rate rules. Throws a FieldRangeError naming the input for readings
 * out of order, in the future or not positive.
 */
export function assessCmlLife(input: CmlLifeInput): CmlLife {
  requireObject("input", input);
  const policy = checkPolicy(input.policy);
  if (!Array.isArray(input.readings)) throw rangeError("readings", "an array of { date, thicknessMm }", input.readings);
  const todayDay = parseIsoDay("today", input.today);
  if (input.maxIntervalYears !== undefined) requirePositive("maxIntervalYears", input.maxIntervalYears);
  if (input.pipingClass !== null) requireOneOf("pipingClass", input.pipingClass, [1, 2, 3, 4] as const);
  if (input.requiredMm !== null) requirePositive("requiredMm", input.requiredMm);
  const readings = input.readings;
  readings.forEach((r, i) => {
    requireObject(`readings[${i}]`, r);
    if (parseIsoDay(`readings[${i}].date`, r.date) > todayDay)
      throw new FieldRangeError(`readings[${i}].date`, `readings[${i}].date must not be after today ${input.today}`);
    requirePositive(`readings[${i}].thicknessMm`, r.thicknessMm);
  });
  const last = readings[readings.length - 1];
  if (readings.length === 0) return noDataCml(input, policy, "No approved thickness readings yet.");
  if (input.requiredMm === null)
    return noDataCml(input, policy, input.requiredMissingReason ?? "design data missing: required thickness", last);
  const required = input.requiredMm;

  // The base-line, when one can be found.
  const flags: CmlLife["flags"] = [];
  let baseline: CmlLife["baseline"] = null;
  const statedThickness = input.baseline?.thicknessMm ?? null;
  const baselineDate = input.baseline?.date ?? null;
  if (baselineDate === null) {
    // An undated base-line cannot start a rate: the long-term rate starts at the first reading.
    if (statedThickness !== null || input.nominalWallMm != null)
      flags.push({
        code: "baseline-undated",
        severity: "info",
        message:
          "The CML's base-line has no date, so it is not used: the long-term rate starts at the first reading. State the base-line date (e.g. of the commissioning survey) to use it.",
      });
  } else if (statedThickness !== null) {
    baseline = {
      thicknessMm: requirePositive("baseline.thicknessMm", statedThickness),
      date: baselineDate,
      source: "stated",
    };
  } else if (input.nominalWallMm != null) {
    const nominal = requirePositive("nominalWallMm", input.nominalWallMm);
    const tol =
      input.millTolerancePct == null ? 0 : requireInClosed("millTolerancePct", input.millTolerancePct, 0, 99.99);
    baseline = { thicknessMm: nominal * (1 - tol / 100), date: baselineDate, source: "nominal-less-mill-tolerance" };
  }
  if (baseline && parseIsoDay("baseline.date", baseline.date) > parseIsoDay("readings[0].date", readings[0].date)) {
    flags.push({
      code: "baseline-after-readings",
      severity: "warning",
      message: `The base-line date ${baseline.date} is after the first reading (${readings[0].date}); the base-line is not used. Check the CML's base-line.`,
    });
    baseline = null;
  }

  // The series the rates are taken over: a base-line dated before the first reading is its first point.
  const baselineBefore = baseline !== null && baseline.date < readings[0].date;
  const series: ThicknessReading[] = baselineBefore
    ? [{ date: baseline!.date, thicknessMm: baseline!.thicknessMm }, ...readings]
    : readings;
  const initial =
    baseline !== null && !baselineBefore ? { date: baseline.date, thicknessMm: baseline.thicknessMm } : undefined;

  const actual = last.thicknessMm;
  const below = actual <= required;
  if (series.length < 2) {
    if (below) return belowRequired(input, policy, baseline, flags, last, null, null, null);
    return {
      ...noDataCml(
        input,
        policy,
        "One thickness value only, and no base-line before it: a rate needs two dates. Survey the CML again or state its base-line.",
        last,
      ),
      baseline,
      flags,
    };
  }

  const rates = thicknessRates(series, initial);
  flags.push(...thicknessQualityFlags(series, initial ? { initial } : undefined));
  let regression: RegressionRate | null = null;
  if (readings.length >= 3 && readings[0].date !== last.date) regression = regressionRate(readings);
  const regressionView = regression
    ? {
        mmPerYear: regression.mmPerYear,
        lowerMmPerYear: regression.lowerMmPerYear,
        upperMmPerYear: regression.upperMmPerYear,
        confidence: regression.confidence,
        n: regression.n,
        rSquared: regression.rSquared,
        grew: regression.grew,
      }
    : null;
  if (below)
    return belowRequired(
      input,
      policy,
      baseline,
      flags,
      last,
      rates.longTermMmPerYear,
      rates.shortTermMmPerYear,
      regressionView,
    );

  // The governing rate by the owner's policy, then the stated minimum as a floor.
  let governing: GoverningRateName;
  let rate: number;
  let rateNote: string;
  if (policy.policy === "regression_upper" && regression) {
    governing = "regression-upper";
    rate = regression.upperMmPerYear;
    rateNote = `Upper ${regression.confidence * 100} % bound of the regression rate over ${regression.n} readings.`;
  } else {
    governing = rates.shortTermMmPerYear > rates.longTermMmPerYear ? "short-term" : "long-term";
    rate = Math.max(rates.longTermMmPerYear, rates.shortTermMmPerYear);
    rateNote =
      policy.policy === "regression_upper"
        ? "The greater of the long-term and short-term rates (API 570): the regression needs three readings."
        : "The greater of the long-term and short-term rates (API 570).";
  }
  if (policy.minimumRateMmPerYear !== undefined && rate < policy.minimumRateMmPerYear) {
    rateNote += ` The measured rate (${round(rate, 4)} mm/y) is below the stated minimum of ${policy.minimumRateMmPerYear} mm/y, which governs.`;
    governing = "stated-minimum";
    rate = policy.minimumRateMmPerYear;
  }
  const basis = basisOf(input, policy, rateNote, regression ? REGRESSION_METHOD : null);
  const common = {
    readingsUsed: readings.length,
    lastMeasuredOn: last.date,
    lastThicknessMm: actual,
    baseline,
    longTermMmPerYear: rates.longTermMmPerYear,
    shortTermMmPerYear: rates.shortTermMmPerYear,
    regression: regressionView,
    asOf: last.date,
    flags: warningsFirst(flags),
    basis,
  };

  if (rate <= 0) {
    const next = lifeNextInspection({
      remainingLifeYears: Infinity,
      pipingClass: input.pipingClass,
      injectionPoint: input.injectionPoint,
      inspectedOn: last.date,
      ...(input.maxIntervalYears !== undefined ? { maxIntervalYears: input.maxIntervalYears } : {}),
    });
    return {
      ...common,
      condition: "no_loss",
      governingRateMmPerYear: 0,
      governingRate: governing,
      remainingLifeYears: null,
      remainingLifeConservativeYears: null,
      lifeNote:
        "No measurable wall loss and no stated minimum rate: no remaining life can be stated. The next inspection follows the maximum interval.",
      projectedRequiredOn: null,
      nextInspection: next,
    };
  }

  const governingLife = remainingLife({ actualMm: actual, requiredMm: required, rateMmPerYear: rate });
  let point = governingLife;
  let conservative = governingLife;
  let lifeNote: string | null = null;
  if (regression) {
    const r = conservativeRemainingLife({ actualMm: actual, requiredMm: required, regression });
    if (governing === "regression-upper") {
      // The policy's rate is the upper bound: the point estimate is the regression's best estimate.
      point = r.bestEstimateYears;
      conservative = governingLife;
      if (!Number.isFinite(point))
        lifeNote =
          "The regression's best estimate shows no loss, so no point estimate is stated; the conservative figure (upper bound of the rate) is.";
    } else {
      // The policy's rate (API 570 long-/short-term, or the stated minimum) gives the point
      // estimate; the regression's upper bound may only shorten the conservative figure.
      point = governingLife;
      conservative = Math.min(governingLife, r.conservativeYears);
    }
  } else {
    lifeNote =
      "Fewer than three readings, so no regression: the point estimate is the governing rate's remaining life.";
  }
  // The owner's policy decides the date: the next inspection and the projected date come from
  // the remaining life at the governing rate (the regression's bound, under the default
  // policy, is reported beside it and does not move them).
  const next = lifeNextInspection({
    remainingLifeYears: governingLife,
    pipingClass: input.pipingClass,
    injectionPoint: input.injectionPoint,
    inspectedOn: last.date,
    ...(input.maxIntervalYears !== undefined ? { maxIntervalYears: input.maxIntervalYears } : {}),
  });
  return {
    ...common,
    condition: "assessed",
    governingRateMmPerYear: rate,
    governingRate: governing,
    remainingLifeYears: Number.isFinite(point) ? point : null,
    remainingLifeConservativeYears: conservative,
    lifeNote,
    projectedRequiredOn: projectedDay(last.date, governingLife),
    nextInspection: next,
  };
}

function belowRequired(
  input: CmlLifeInput,
  policy: RatePolicy,
  baseline: CmlLife["baseline"],
  flags: CmlLife["flags"],
  last: ThicknessReading,
  longTerm: number | null,
  shortTerm: number | null,
  regression: CmlLife["regression"],
): CmlLife {
  return {
    condition: "below_required",
    readingsUsed: input.readings.length,
    lastMeasuredOn: last.date,
    lastThicknessMm: last.thicknessMm,
    baseline,
    longTermMmPerYear: longTerm,
    shortTermMmPerYear: shortTerm,
    regression,
    governingRateMmPerYear: longTerm === null ? null : Math.max(longTerm, shortTerm ?? 0),
    governingRate: longTerm === null ? null : (shortTerm ?? 0) > longTerm ? "short-term" : "long-term",
    remainingLifeYears: 0,
    remainingLifeConservativeYears: 0,
    lifeNote: `${BELOW_REQUIRED_WORDS} The last reading, ${last.thicknessMm} mm on ${last.date}, is at or below the required ${round(input.requiredMm as number, 3)} mm.`,
    asOf: last.date,
    projectedRequiredOn: last.date,
    nextInspection: { dueOn: null, intervalYears: null, governedBy: null, note: BELOW_REQUIRED_WORDS },
    flags: warningsFirst(flags),
    basis: basisOf(input, policy, "The wall is at or below its required thickness.", null),
  };
}

function warningsFirst<T extends { severity: string }>(flags: T[]): T[] {
  return [...flags.filter((f) => f.severity === "warning"), ...flags.filter((f) => f.severity !== "warning")];
}

/* ---------------------------------------------------------------- one circuit */

export interface CouponRateInput {
  /** Which coupon pull (for the list). */
  id: string;
  serial?: string;
  materialCode: string;
  removedOn: string;
  determinable: boolean;
  generalMmPerYear: number | null;
  pittingMmPerYear: number | null;
}

export interface CouponRatesSummary {
  windowYears: number;
  since: string;
  maxGeneralMmPerYear: number | null;
  maxPittingMmPerYear: number | null;
  used: Array<{
    id: string;
    serial: string | null;
    removedOn: string;
    generalMmPerYear: number | null;
    pittingMmPerYear: number | null;
  }>;
  /** How many were left out, by reason. */
  leftOut: { otherMaterial: number; notDeterminable: number; outsideWindow: number };
}

export interface CircuitLifeInput {
  circuitMaterialCode: string;
  /** Required thickness, mm, and what governed it; null with the missing design data in words. */
  required: { requiredMm: number; governedBy: string; reason: string } | null;
  requiredMissingReason?: string;
  nominalWallMm: number | null;
  millTolerancePct: number | null;
  pipingClass: 1 | 2 | 3 | 4 | null;
  policy: RatePolicy;
  maxIntervalYears?: number;
  couponWindowYears?: number;
  couponRateBasis?: "general" | "pitting";
  disagreementFactor?: number;
  today: string;
  cmls: Array<{
    id: string;
    tag?: string;
    injectionPoint: boolean;
    baseline: { thicknessMm: number | null; date: string | null };
    readings: ThicknessReading[];
  }>;
  coupons: CouponRateInput[];
}

export interface CircuitLife {
  condition: LifeCondition;
  requiredMm: number | null;
  requiredGovernedBy: string | null;
  governingCmlId: string | null;
  governingRateMmPerYear: number | null;
  rateSource: "thickness" | "coupon-general" | "coupon-pitting" | null;
  remainingLifeYears: number | null;
  remainingLifeConservativeYears: number | null;
  lifeNote: string | null;
  asOf: string | null;
  projectedRequiredOn: string | null;
  nextInspection: NextInspectionResult;
  couponRates: CouponRatesSummary;
  flags: QualityFlag<LifeFlagCode>[];
  cmls: Array<{ id: string } & CmlLife>;
  basis: {
    formulaVersion: string;
    policy: RatePolicy;
    required: CircuitLifeInput["required"];
    nominalWallMm: number | null;
    millTolerancePct: number | null;
    pipingClass: number | null;
    maxIntervalYears: number | null;
    couponWindowYears: number;
    couponRateBasis: "general" | "pitting";
    disagreementFactor: number;
    sources: string[];
    governing: string;
  };
}

const SOURCES = [
  "API 570: long-term and short-term rates, remaining life = (t_actual − t_required) / rate, interval = min(½ remaining life, class maximum)",
  "ASME B31.3 §304.1.2 eq. (3a) and the API 574 structural minimum (required thickness)",
  "NIST/SEMATECH e-Handbook §4.1.4.1 (regression rate and its upper bound)",
  "Injection points: 3-year maximum interval [mem]",
];

/** Rank for the governing CML: below required first, then the shortest conservative life, then no loss, then no data. */
function rank(c: CmlLife): [number, number] {
  if (c.condition === "below_required") return [0, c.lastThicknessMm ?? 0];
  if (c.condition === "assessed") return [1, c.remainingLifeConservativeYears ?? Infinity];
  if (c.condition === "no_loss") return [2, 0];
  return [3, 0];
}

/** The circuit's coupon rates: same material, determinable, removed within the window. */
export function circuitCouponRates(
  coupons: CouponRateInput[],
  materialCode: string,
  today: string,
  windowYears: number,
): CouponRatesSummary {
  const todayDay = parseIsoDay("today", today);
  const whole = Math.floor(windowYears);
  const sinceDay = addCalendarYears(todayDay, -whole) - Math.floor((windowYears - whole) * DAYS_PER_YEAR_THICKNESS);
  const since = formatIsoDay(sinceDay);
  const out: CouponRatesSummary = {
    windowYears,
    since,
    maxGeneralMmPerYear: null,
    maxPittingMmPerYear: null,
    used: [],
    leftOut: { otherMaterial: 0, notDeterminable: 0, outsideWindow: 0 },
  };
  coupons.forEach((c, i) => {
    const removed = parseIsoDay(`coupons[${i}].removedOn`, c.removedOn);
    if (c.materialCode !== materialCode) out.leftOut.otherMaterial++;
    else if (!c.determinable || c.generalMmPerYear === null) out.leftOut.notDeterminable++;
    else if (removed < sinceDay || removed > todayDay) out.leftOut.outsideWindow++;
    else {
      out.used.push({
        id: c.id,
        serial: c.serial ?? null,
        removedOn: c.removedOn,
        generalMmPerYear: c.generalMmPerYear,
        pittingMmPerYear: c.pittingMmPerYear,
      });
      if (out.maxGeneralMmPerYear === null || c.generalMmPerYear > out.maxGeneralMmPerYear)
        out.maxGeneralMmPerYear = c.generalMmPerYear;
      if (
        c.pittingMmPerYear !== null &&
        (out.maxPittingMmPerYear === null || c.pittingMmPerYear > out.maxPittingMmPerYear)
      )
        out.maxPittingMmPerYear = c.pittingMmPerYear;
    }
  });
  return out;
}

/**
 * Remaining life of a circuit: every CML assessed, the governing CML (below required first,
 * then the shortest conservative remaining life), the next inspection the earliest of its
 * CMLs', the circuit's approved coupon rates, and — when no CML has a usable thickness
 * history (two points in time, base-line included) — a coupon-based estimate from the
 * base-line wall.
 */
export function assessCircuitLife(input: CircuitLifeInput): CircuitLife {
  requireObject("input", input);
  const policy = checkPolicy(input.policy);
  const windowYears =
    input.couponWindowYears === undefined ? 2 : requireInClosed("couponWindowYears", input.couponWindowYears, 0.01, 20);
  const basisKind = input.couponRateBasis ?? "general";
  requireOneOf("couponRateBasis", basisKind, ["general", "pitting"] as const);
  const factor =
    input.disagreementFactor === undefined ? 2 : requirePositive("disagreementFactor", input.disagreementFactor);
  if (!(factor > 1)) throw rangeError("disagreementFactor", "> 1", factor);
  const requiredMm = input.required?.requiredMm ?? null;
  const missing = input.requiredMissingReason ?? "design data missing: required thickness";
  const max = input.maxIntervalYears;

  const cmls = input.cmls.map((c) => ({
    id: c.id,
    ...assessCmlLife({
      readings: c.readings,
      baseline: c.baseline,
      nominalWallMm: input.nominalWallMm,
      millTolerancePct: input.millTolerancePct,
      requiredMm,
      requiredMissingReason: missing,
      policy,
      pipingClass: input.pipingClass,
      injectionPoint: c.injectionPoint,
      ...(max !== undefined ? { maxIntervalYears: max } : {}),
      today: input.today,
    }),
  }));
  const couponRates = circuitCouponRates(input.coupons, input.circuitMaterialCode, input.today, windowYears);
  const flags: CircuitLife["flags"] = [];
  const basis: CircuitLife["basis"] = {
    formulaVersion: FORMULA_VERSION,
    policy,
    required: input.required,
    nominalWallMm: input.nominalWallMm,
    millTolerancePct: input.millTolerancePct,
    pipingClass: input.pipingClass,
    maxIntervalYears: max ?? null,
    couponWindowYears: windowYears,
    couponRateBasis: basisKind,
    disagreementFactor: factor,
    sources: SOURCES,
    governing: "",
  };
  const empty = (note: string): CircuitLife => ({
    condition: "no_data",
    requiredMm,
    requiredGovernedBy: input.required?.governedBy ?? null,
    governingCmlId: null,
    governingRateMmPerYear: null,
    rateSource: null,
    remainingLifeYears: null,
    remainingLifeConservativeYears: null,
    lifeNote: note,
    asOf: null,
    projectedRequiredOn: null,
    nextInspection: { dueOn: null, intervalYears: null, governedBy: null, note },
    couponRates,
    flags,
    cmls,
    basis: { ...basis, governing: note },
  });
  if (input.required === null) {
    flags.push({ code: "design-data-missing", severity: "warning", message: missing });
    return empty(missing);
  }

  const sorted = [...cmls].sort((a, b) => {
    const [ra, va] = rank(a);
    const [rb, vb] = rank(b);
    return ra !== rb ? ra - rb : va - vb;
  });
  const governing = sorted[0];
  const usable = cmls.some((c) => c.condition !== "no_data");

  if (!usable) {
    // A coupon-based estimate from the base-line wall, worn at the coupon rate since its date:
    // the thinnest dated base-line the CMLs state, else nominal less mill under-tolerance at the
    // earliest base-line date. Without a date the time in service is unknown and no estimate is made.
    const rate = basisKind === "pitting" ? couponRates.maxPittingMmPerYear : couponRates.maxGeneralMmPerYear;
    const stated = input.cmls
      .filter((c) => c.baseline.thicknessMm !== null && c.baseline.date !== null)
      .sort((a, b) => a.baseline.thicknessMm! - b.baseline.thicknessMm!);
    const earliestDate =
      input.cmls
        .map((c) => c.baseline.date)
        .filter((d): d is string => d !== null)
        .sort()[0] ?? null;
    const nominalLess =
      input.nominalWallMm === null ? null : input.nominalWallMm * (1 - (input.millTolerancePct ?? 0) / 100);
    const start: { wall: number; date: string; words: string } | null = stated.length
      ? {
          wall: stated[0].baseline.thicknessMm!,
          date: stated[0].baseline.date!,
          words: `the thinnest stated CML base-line, ${round(stated[0].baseline.thicknessMm!, 3)} mm on ${stated[0].baseline.date}`,
        }
      : nominalLess !== null && earliestDate !== null
        ? {
            wall: nominalLess,
            date: earliestDate,
            words: `the nominal wall less mill under-tolerance, ${round(nominalLess, 3)} mm, from ${earliestDate}`,
          }
        : null;
    if (rate === null || rate <= 0 || start === null) {
      const why =
        rate === null || rate <= 0
          ? `no approved ${basisKind} coupon rate of its material in the last ${windowYears} years`
          : nominalLess === null && stated.length === 0
            ? "no base-line wall (no stated CML base-line and no nominal wall)"
            : "no base-line date, so the time in service is unknown (state a CML base-line date)";
      return empty(
        cmls.length === 0
          ? `No CMLs on this circuit and no coupon-based estimate: ${why}.`
          : `No CML has a usable thickness history (two dates, base-line included), and no coupon-based estimate: ${why}.`,
      );
    }
    const source = basisKind === "pitting" ? "coupon-pitting" : "coupon-general";
    const asOf = input.today;
    const yearsInService = Math.max(
      0,
      (parseIsoDay("today", asOf) - parseIsoDay("baseline.date", start.date)) / DAYS_PER_YEAR_THICKNESS,
    );
    const wall = start.wall - rate * yearsInService;
    const message = `Coupon-based estimate: the highest approved ${basisKind} coupon rate, ${round(rate, 4)} mm/y, applied to ${start.words}: ${round(wall, 3)} mm estimated today after ${round(yearsInService, 2)} years; no CML has a usable thickness history.`;
    flags.push({ code: "coupon-based-estimate", severity: "warning", message });
    if (wall <= requiredMm!) {
      return {
        ...empty(BELOW_REQUIRED_WORDS),
        condition: "below_required",
        remainingLifeYears: 0,
        remainingLifeConservativeYears: 0,
        governingRateMmPerYear: rate,
        rateSource: source,
        asOf,
        projectedRequiredOn: asOf,
        basis: { ...basis, governing: message },
      };
    }
    const life = remainingLife({ actualMm: wall, requiredMm: requiredMm!, rateMmPerYear: rate });
    const next = lifeNextInspection({
      remainingLifeYears: life,
      pipingClass: input.pipingClass,
      injectionPoint: false,
      inspectedOn: asOf,
      ...(max !== undefined ? { maxIntervalYears: max } : {}),
    });
    return {
      condition: "assessed",
      requiredMm,
      requiredGovernedBy: input.required.governedBy,
      governingCmlId: null,
      governingRateMmPerYear: rate,
      rateSource: source,
      remainingLifeYears: life,
      remainingLifeConservativeYears: life,
      lifeNote: message,
      asOf,
      projectedRequiredOn: projectedDay(asOf, life),
      nextInspection: next,
      couponRates,
      flags,
      cmls,
      basis: { ...basis, governing: message },
    };
  }

  // Coupon and thickness rates that disagree.
  // The measured thickness rate: a stated minimum is a policy floor, not a measurement to compare.
  const thicknessRate =
    governing.governingRate === "stated-minimum"
      ? Math.max(governing.longTermMmPerYear ?? 0, governing.shortTermMmPerYear ?? 0)
      : governing.governingRateMmPerYear;
  const couponRate = couponRates.maxGeneralMmPerYear;
  if (thicknessRate !== null && couponRate !== null) {
    const hi = Math.max(thicknessRate, couponRate);
    const lo = Math.min(thicknessRate, couponRate);
    if (hi > 0 && (lo === 0 || hi / lo > factor))
      flags.push({
        code: "coupon-thickness-disagree",
        severity: "warning",
        message: `Coupon and thickness rates disagree: the highest approved general coupon rate is ${round(couponRate, 4)} mm/y and the governing thickness rate ${round(thicknessRate, 4)} mm/y, more than ${factor}× apart. Check the coupon position against the CMLs and the survey data.`,
      });
  }

  const dates = cmls.map((c) => c.nextInspection.dueOn).filter((d): d is string => d !== null);
  const earliest = dates.length ? dates.reduce((a, b) => (a < b ? a : b)) : null;
  const earliestCml = earliest ? cmls.find((c) => c.nextInspection.dueOn === earliest) : undefined;
  const governingWords = `CML ${governing.id}${governing.condition === "below_required" ? " (below required thickness)" : ""}: ${governing.basis.rateNote}`;
  return {
    condition: governing.condition,
    requiredMm,
    requiredGovernedBy: input.required.governedBy,
    governingCmlId: governing.id,
    governingRateMmPerYear: governing.governingRateMmPerYear,
    rateSource: governing.governingRateMmPerYear === null ? null : "thickness",
    remainingLifeYears: governing.remainingLifeYears,
    remainingLifeConservativeYears: governing.remainingLifeConservativeYears,
    lifeNote: governing.lifeNote,
    asOf: governing.asOf,
    projectedRequiredOn: governing.projectedRequiredOn,
    // A CML below required thickness needs assessment or repair now: no later date of another
    // CML may stand for the circuit.
    nextInspection:
      governing.condition === "below_required"
        ? governing.nextInspection
        : earliestCml
          ? earliestCml.nextInspection
          : { dueOn: null, intervalYears: null, governedBy: null, note: governing.nextInspection.note },
    couponRates,
    flags,
    cmls,
    basis: { ...basis, governing: governingWords },
  };
}

/* ---------------------------------------------------------------- status at read time */

export type LifeStatus = "below_required" | "overdue" | "due_soon" | "in_service" | "no_date" | "no_data";

/** The words for each status: the one place screens, the API and e-mails take them from. */
export const LIFE_STATUS_WORDS: Readonly<Record<LifeStatus, string>> = {
  below_required: BELOW_REQUIRED_WORDS,
  overdue: "Inspection overdue — the next thickness inspection date has passed.",
  due_soon: `Inspection due soon — within ${DUE_SOON_DAYS} days.`,
  in_service: "In service — next thickness inspection not yet due.",
  no_date:
    "No inspection date — no interval can be set: give the circuit its piping class, or set the owner's maximum interval.",
  no_data: "No remaining life — not enough data to compute one.",
};

/**
 * The status of a stored life against today (judged when read; the stored row keeps the
 * date, not the status): below required first, then overdue (the date has passed), due
 * soon (within 90 days [cp]), in service; no data when there is neither a life nor a date.
 */
export function lifeStatus(
  life: { condition: LifeCondition; nextInspectionOn: string | null },
  today: string,
): { code: LifeStatus; words: string } {
  requireObject("life", life);
  const todayDay = parseIsoDay("today", today);
  const pick = (code: LifeStatus) => ({ code, words: LIFE_STATUS_WORDS[code] });
  if (life.condition === "below_required") return pick("below_required");
  if (life.nextInspectionOn === null)
    return pick(life.condition === "assessed" || life.condition === "no_loss" ? "no_date" : "no_data");
  const due = parseIsoDay("nextInspectionOn", life.nextInspectionOn);
  if (due < todayDay) return pick("overdue");
  if (due - todayDay <= DUE_SOON_DAYS) return pick("due_soon");
  return pick("in_service");
}
