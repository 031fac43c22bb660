/**
 * Quality flags raised before an engineer approves coupon results or
 * thickness data. A flag never changes a number; it tells the reviewer what
 * to look at, in plain words.
 *
 * Standards and practice: ASTM G1 and G31, NACE SP0775 (coupon handling,
 * blanks, cleaning, exposure length), ASTM G46 (pitting factor), API 570
 * (thickness data per CML). The thresholds are common practice [cp] unless
 * the owner sets them: field exposures of 60–90 days, a loss well above the
 * balance resolution and the blank, no mass gain, a consistent history;
 * growth between thickness surveys is a flag, never a negative rate.
 */

import { averagePenetrationMm } from "./pitting.ts";
import { thicknessRates } from "./piping.ts";
import type { ThicknessReading } from "./piping.ts";
import { parseIsoDay } from "./dates.ts";
import { DAYS_PER_YEAR_THICKNESS } from "./units.ts";
import { requireFinite, requireNonNegative, requireObject, requirePositive, rangeError } from "./validate.ts";

export type FlagSeverity = "warning" | "info";

export type CouponFlagCode =
  | "mass-gain"
  | "exposure-short"
  | "loss-below-resolution"
  | "loss-near-resolution"
  | "loss-near-blank"
  | "pitting-not-observed"
  | "pit-depth-missing"
  | "pitting-factor-below-one"
  | "area-mismatch"
  | "history-jump";

export type ThicknessFlagCode = "thickness-growth" | "rate-jump" | "few-readings";

export interface QualityFlag<Code extends string = CouponFlagCode | ThicknessFlagCode> {
  /** Stable identifier for filters, storage and tests. */
  code: Code;
  /** "warning": the reviewer should resolve it before approval; "info": worth knowing. */
  severity: FlagSeverity;
  /** What was found and why it matters, in plain words with the numbers. */
  message: string;
}

/** Common-practice thresholds [cp]; every one can be overridden per call. */
export const QUALITY_DEFAULTS = {
  /** Field exposures shorter than 60 days read high (initial corrosion is faster) [cp]. */
  minimumExposureHours: 60 * 24,
  /** A loss below 10× the balance resolution carries more than ~10 % weighing uncertainty [cp]. */
  resolutionMultiple: 10,
  /** The blank correction should be less than half of the coupon's loss [cp]. */
  blankRatio: 0.5,
  /** A pitting factor of 2 or more is localised attack, not general roughening [cp]. */
  pittingFactorLimit: 2,
  /** Lab-sheet area and geometry area may differ by rounding up to 2 % [cp]. */
  areaTolerance: 0.02,
  /** UT readings that grow by more than this between surveys are flagged, mm [cp: 0, every growth]. */
  measurementToleranceMm: 0,
  /** The latest interval's rate may be up to this multiple of the history before it is a jump [cp]. */
  jumpFactor: 2,
} as const;

/* ---------------------------------------------------------------- coupons */

export interface CouponQualityInput {
  /** Mass change, g: initial − final. Negative means the coupon gained mass. */
  massLossG: number;
  exposureHours: number;
  /** The owner's minimum exposure, h (default 60 days). */
  minimumExposureHours?: number;
  /** Readability of the balance used, g (e.g. 0.0001). */
  balanceResolutionG?: number;
  /** Loss of the blank (control coupon) cleaned the same way, g. */
  blankLossG?: number;
  /** As-removed observation: false means the technician recorded "no pitting". */
  pittingObserved?: boolean;
  /** Deepest pit measured by the lab, mm. */
  maxPitDepthMm?: number;
  /** Exposed area used for the rate (from the geometry), cm². */
  areaCm2?: number;
  densityGcm3?: number;
  /** Area written on the lab sheet, cm², compared with areaCm2. */
  declaredAreaCm2?: number;
  resolutionMultiple?: number;
  blankRatio?: number;
  pittingFactorLimit?: number;
  areaTolerance?: number;
}

function fmt(value: number, digits = 4): string {
  return Number(value.toPrecision(digits)).toString();
}

/**
 * Flags for one coupon result (warnings first). Codes:
 * - `mass-gain` (warning): the coupon weighs more after cleaning than before;
 * - `exposure-short` (warning): shorter than the owner's minimum exposure;
 * - `loss-below-resolution` (warning): loss not above the balance resolution;
 * - `loss-near-resolution` (info): loss under 10× the resolution;
 * - `loss-near-blank` (warning): the blank lost at least half as much as the coupon;
 * - `pitting-not-observed` (warning): "no pitting" recorded, but the measured pit
 *   gives a pitting factor at or above the limit (2);
 * - `pit-depth-missing` (info): pitting recorded but no pit depth measured;
 * - `pitting-factor-below-one` (info): the deepest pit is shallower than the
 *   average penetration, which points at a measurement or area error;
 * - `area-mismatch` (warning): lab-sheet area and geometry area differ by more than 2 %.
 */
export function couponQualityFlags(input: CouponQualityInput): QualityFlag<CouponFlagCode>[] {
  requireObject("input", input);
  const loss = requireFinite("massLossG", input.massLossG);
  const hours = requirePositive("exposureHours", input.exposureHours);
  const minimumHours =
    input.minimumExposureHours === undefined
      ? QUALITY_DEFAULTS.minimumExposureHours
      : requirePositive("minimumExposureHours", input.minimumExposureHours);
  const resolutionMultiple =
    input.resolutionMultiple === undefined
      ? QUALITY_DEFAULTS.resolutionMultiple
      : requirePositive("resolutionMultiple", input.resolutionMultiple);
  const blankRatio =
    input.blankRatio === undefined ? QUALITY_DEFAULTS.blankRatio : requirePositive("blankRatio", input.blankRatio);
  const pfLimit =
    input.pittingFactorLimit === undefined
      ? QUALITY_DEFAULTS.pittingFactorLimit
      : requirePositive("pittingFactorLimit", input.pittingFactorLimit);
  const areaTolerance =
    input.areaTolerance === undefined
      ? QUALITY_DEFAULTS.areaTolerance
      : requireNonNegative("areaTolerance", input.areaTolerance);
  const flags: QualityFlag<CouponFlagCode>[] = [];

  if (loss < 0) {
    flags.push({
      code: "mass-gain",
      severity: "warning",
      message: `The coupon gained ${fmt(-loss)} g. Deposits or corrosion product were probably not fully removed; re-clean and re-weigh before a rate is reported.`,
    });
  }

  if (hours < minimumHours) {
    flags.push({
      code: "exposure-short",
      severity: "warning",
      message: `The exposure of ${fmt(hours / 24, 3)} days is shorter than the minimum of ${fmt(minimumHours / 24, 3)} days. Short exposures read high because early corrosion is faster.`,
    });
  }

  if (input.balanceResolutionG !== undefined && loss >= 0) {
    const resolution = requirePositive("balanceResolutionG", input.balanceResolutionG);
    if (loss <= resolution) {
      flags.push({
        code: "loss-below-resolution",
        severity: "warning",
        message: `The mass loss of ${fmt(loss)} g is not above the balance resolution of ${fmt(resolution)} g, so it cannot be told apart from zero.`,
      });
    } else if (loss < resolutionMultiple * resolution) {
      flags.push({
        code: "loss-near-resolution",
        severity: "info",
        message: `The mass loss of ${fmt(loss)} g is less than ${fmt(resolutionMultiple)} times the balance resolution of ${fmt(resolution)} g; the rate carries a large weighing uncertainty.`,
      });
    }
  }

  if (input.blankLossG !== undefined && loss >= 0) {
    const blank = requireNonNegative("blankLossG", input.blankLossG);
    if (blank > 0 && blank >= blankRatio * loss) {
      flags.push({
        code: "loss-near-blank",
        severity: "warning",
        message: `The blank lost ${fmt(blank)} g against ${fmt(loss)} g for the coupon, so the cleaning itself accounts for much of the loss. Check that coupon and blank were cleaned the same way.`,
      });
    }
  }

  const depth =
    input.maxPitDepthMm === undefined ? undefined : requireNonNegative("maxPitDepthMm", input.maxPitDepthMm);
  let factor: number | undefined;
  if (depth !== undefined && depth > 0 && loss > 0 && input.areaCm2 !== undefined && input.densityGcm3 !== undefined) {
    factor = depth / averagePenetrationMm(loss, input.areaCm2, input.densityGcm3);
  }
  if (input.pittingObserved !== undefined && typeof input.pittingObserved !== "boolean") {
    throw rangeError("pittingObserved", "true or false", input.pittingObserved);
  }
  if (
    input.pittingObserved === false &&
    depth !== undefined &&
    depth > 0 &&
    (factor === undefined || factor >= pfLimit)
  ) {
    flags.push({
      code: "pitting-not-observed",
      severity: "warning",
      message:
        factor === undefined
          ? `"No pitting" was recorded at removal, but the lab measured a pit ${fmt(depth)} mm deep. Compare the photographs before and after cleaning.`
          : `"No pitting" was recorded at removal, but the lab's ${fmt(depth)} mm pit gives a pitting factor of ${fmt(factor, 3)} (localised attack from ${fmt(pfLimit, 3)}). Compare the photographs before and after cleaning.`,
    });
  }
  if (input.pittingObserved === true && (depth === undefined || depth === 0)) {
    flags.push({
      code: "pit-depth-missing",
      severity: "info",
      message: "Pitting was recorded at removal but no pit depth was measured, so no pitting rate can be reported.",
    });
  }
  if (factor !== undefined && factor < 1) {
    flags.push({
      code: "pitting-factor-below-one",
      severity: "info",
      message: `The deepest pit (${fmt(depth as number)} mm) is shallower than the average penetration from mass loss (pitting factor ${fmt(factor, 3)}). Check the pit measurement, the area and the density.`,
    });
  }

  if (input.declaredAreaCm2 !== undefined && input.areaCm2 !== undefined) {
    const declared = requirePositive("declaredAreaCm2", input.declaredAreaCm2);
    const computed = requirePositive("areaCm2", input.areaCm2);
    const difference = Math.abs(declared - computed) / computed;
    if (difference > areaTolerance) {
      flags.push({
        code: "area-mismatch",
        severity: "warning",
        message: `The lab sheet gives an area of ${fmt(declared)} cm², but the coupon's dimensions give ${fmt(computed)} cm² (${fmt(difference * 100, 3)} % apart). Check the dimensions and the hole.`,
      });
    }
  }

  return warningsFirst(flags);
}

/* ---------------------------------------------------------------- thickness data */

export interface ThicknessQualityOptions {
  /** Baseline (nominal or commissioning) thickness, as for thicknessRates. */
  initial?: ThicknessReading;
  /** Growth up to this amount between surveys is not flagged, mm (default 0: every growth is flagged). */
  measurementToleranceMm?: number;
  /** The latest interval's rate may be up to this multiple of the earlier history's rate (default 2). */
  jumpFactor?: number;
}

/**
 * Flags for the thickness readings of one CML (warnings first). Readings are
 * validated as for thicknessRates (oldest first, one per day). Codes:
 * - `thickness-growth` (warning): the wall grew between two surveys by more than the
 *   tolerance — a measurement artefact, never a negative rate;
 * - `rate-jump` (warning): the latest interval lost wall more than `jumpFactor` times
 *   faster than the CML's earlier history;
 * - `few-readings` (info): only two points, so there is no history to compare and no
 *   regression interval.
 */
export function thicknessQualityFlags(
  readings: ThicknessReading[],
  options?: ThicknessQualityOptions,
): QualityFlag<ThicknessFlagCode>[] {
  if (options !== undefined) requireObject("options", options);
  const initial = options?.initial;
  thicknessRates(readings, initial); // validates dates, order and thicknesses with the same messages
  const tolerance =
    options?.measurementToleranceMm === undefined
      ? QUALITY_DEFAULTS.measurementToleranceMm
      : requireNonNegative("options.measurementToleranceMm", options.measurementToleranceMm);
  const jumpFactor =
    options?.jumpFactor === undefined
      ? QUALITY_DEFAULTS.jumpFactor
      : requirePositive("options.jumpFactor", options.jumpFactor);

  const points: ThicknessReading[] = initial === undefined ? readings : [initial, ...readings];
  const days = points.map((p, i) => parseIsoDay(i === 0 && initial !== undefined ? "initial.date" : "date", p.date));
  const flags: QualityFlag<ThicknessFlagCode>[] = [];

  for (let i = 1; i < points.length; i++) {
    const growth = points[i].thicknessMm - points[i - 1].thicknessMm;
    if (growth > tolerance) {
      flags.push({
        code: "thickness-growth",
        severity: "warning",
        message: `The wall reads ${fmt(growth)} mm thicker on ${points[i].date} than on ${points[i - 1].date}. Walls do not grow: check the probe position, calibration and surface. Growth is never used as a negative rate.`,
      });
    }
  }

  const n = points.length;
  if (n < 3) {
    flags.push({
      code: "few-readings",
      severity: "info",
      message:
        "Only two thickness values: the short-term and long-term rates are the same span, and there is no history to compare or regression interval yet.",
    });
  } else {
    const lastLoss = points[n - 2].thicknessMm - points[n - 1].thicknessMm;
    const lastRate = lastLoss / ((days[n - 1] - days[n - 2]) / DAYS_PER_YEAR_THICKNESS);
    const historyRate =
      (points[0].thicknessMm - points[n - 2].thicknessMm) / ((days[n - 2] - days[0]) / DAYS_PER_YEAR_THICKNESS);
    if (lastLoss > tolerance && lastRate > jumpFactor * Math.max(historyRate, 0)) {
      flags.push({
        code: "rate-jump",
        severity: "warning",
        message:
          `Between ${points[n - 2].date} and ${points[n - 1].date} the wall lost ${fmt(lastRate, 3)} mm/y, ` +
          (historyRate > 0
            ? `more than ${fmt(jumpFactor, 3)} times the earlier history of ${fmt(historyRate, 3)} mm/y. `
            : "while the earlier readings showed no loss. ") +
          "Confirm the reading (same location, same instrument) or look for a change in service.",
      });
    }
  }

  return warningsFirst(flags);
}

/** Stable order: warnings before information, otherwise as found. */
function warningsFirst<T extends QualityFlag<string>>(flags: T[]): T[] {
  return flags.filter((f) => f.severity === "warning").concat(flags.filter((f) => f.severity === "info"));
}

/* ---------------------------------------------------------------- coupons against history */

/**
 * A coupon's general rate against the approved rates at the same point [cp]: a rate at
 * least `jumpFactor` times the median of the point's history, or at most 1/`jumpFactor`
 * of it, is flagged so the reviewer checks the weighings, the exposure and the service
 * before approving. Needs at least two earlier results.
 */
export function historyJumpFlag(
  rateMmPerYear: number,
  historyMmPerYear: readonly number[],
  jumpFactor: number = QUALITY_DEFAULTS.jumpFactor,
): QualityFlag<CouponFlagCode> | null {
  requireNonNegative("rateMmPerYear", rateMmPerYear);
  if (!Array.isArray(historyMmPerYear))
    throw rangeError("historyMmPerYear", "an array of rates in mm/y", historyMmPerYear);
  requirePositive("jumpFactor", jumpFactor);
  const history = historyMmPerYear.filter((v) => Number.isFinite(v) && v >= 0).sort((a, b) => a - b);
  if (history.length < 2) return null;
  const mid = history.length >> 1;
  const median = history.length % 2 ? history[mid] : (history[mid - 1] + history[mid]) / 2;
  if (median <= 0) return null;
  const ratio = rateMmPerYear / median;
  if (ratio < jumpFactor && ratio > 1 / jumpFactor) return null;
  const direction = ratio >= jumpFactor ? `${fmt(ratio, 3)} times` : `only ${fmt(ratio * 100, 3)} % of`;
  return {
    code: "history-jump",
    severity: "warning",
    message:
      `The general rate of ${fmt(rateMmPerYear, 3)} mm/y is ${direction} the median of this point's ` +
      `${history.length} earlier approved results (${fmt(median, 3)} mm/y). Check the weighings, the exposure dates ` +
      "and whether the service changed before approving.",
  };
}
