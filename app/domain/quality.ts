/**
 * Quality flags raised before an engineer approves coupon results or
 * thickness data. A flag never changes a number; it tells the reviewer what
 * to look at, in plain words.
 *
 * Standards and practice: ASTM G1 and G31, NACE SP0775 (coupon handling,
 * blanks, cleaning, exposure length), ASTM G46 (pitting factor), API 570
 * (thickness data per CML). The thresholds are common practice [cp] unless
 * the owner sets them: a minimum exposure (default 30 days; field practice
 * 60–90 days), the ASTM G31 duration rule of thumb [mem], a loss well above the
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
  | "blank-exceeds-loss"
  | "cleaning-not-corrected"
  | "exposure-short"
  | "exposure-short-for-rate"
  | "loss-below-resolution"
  | "loss-near-resolution"
  | "loss-near-blank"
  | "pitting-not-observed"
  | "pit-depth-missing"
  | "pitting-factor-below-one"
  | "history-jump"
  | "pitting-history-jump";

export type ThicknessFlagCode =
  "thickness-growth" | "rate-jump" | "few-readings" | "below-required" | "below-resolution" | "finer-than-resolution";

export interface QualityFlag<Code extends string = CouponFlagCode | ThicknessFlagCode> {
  /** Stable identifier for filters, storage and tests. */
  code: Code;
  /** "warning": the reviewer should resolve it before approval; "info": worth knowing. */
  severity: FlagSeverity;
  /** What was found and why it matters, in plain words with the numbers. */
  message: string;
}

/**
 * The library's one default minimum exposure: 30 days, the owner's default setting
 * [cp]. Field practice prefers 60–90 days (early corrosion is faster, so short
 * exposures read high) [cp]; an owner who follows it sets 60 or more.
 */
export const DEFAULT_MINIMUM_EXPOSURE_DAYS = 30;

/**
 * ASTM G31 rule of thumb for test duration [mem]: hours ≈ 2000 / (rate in mpy).
 * Shorter exposures than that for the rate found are a note, not a warning.
 */
const G31_DURATION_CONSTANT_HOURS_MPY = 2000;
/**
 * The rule gives an order of magnitude ("≈"), so an exposure within 10 % of it is not
 * noted [cp]: 120 days against a suggested 122 tells the engineer nothing.
 */
const G31_DURATION_TOLERANCE = 0.9;

/** Common-practice thresholds [cp]; every one can be overridden per call. */
export const QUALITY_DEFAULTS = {
  /** DEFAULT_MINIMUM_EXPOSURE_DAYS in hours (field practice: 60–90 days) [cp]. */
  minimumExposureHours: DEFAULT_MINIMUM_EXPOSURE_DAYS * 24,
  /** A loss below 10× the weighing uncertainty carries more than ~10 % of it [cp]. */
  resolutionMultiple: 10,
  /** The blank's loss should be less than half of the coupon's raw loss [cp]. */
  blankRatio: 0.5,
  /** A pitting factor of 2 or more is localised attack, not general roughening [cp]. */
  pittingFactorLimit: 2,
  /** UT readings that grow by more than this between surveys are flagged, mm [cp: 0, every growth]. */
  measurementToleranceMm: 0,
  /** The latest interval's rate may be up to this multiple of the history before it is a jump [cp]. */
  jumpFactor: 2,
} as const;

/* ---------------------------------------------------------------- coupons */

export interface CouponQualityInput {
  /** The loss the rate uses, g (after any blank or cleaning-curve correction). Negative: the coupon gained mass. */
  massLossG: number;
  /** initial − final before any correction, g; defaults to massLossG + blankLossG (or massLossG without a blank). */
  rawMassLossG?: number;
  exposureHours: number;
  /** The owner's minimum exposure, h (default DEFAULT_MINIMUM_EXPOSURE_DAYS). */
  minimumExposureHours?: number;
  /** Readability of the balance used, g (e.g. 0.0001). */
  balanceResolutionG?: number;
  /** Loss of the blank (control coupon) cleaned the same way, g. */
  blankLossG?: number;
  /** Number of cleaning cycles entered (0 or 1 when only a final mass is known). */
  cleaningCycles?: number;
  /** True when the loss was corrected for cleaning (a blank or the cleaning curve). */
  cleaningCorrected?: boolean;
  /** The general rate found, mpy, for the ASTM G31 duration note. */
  rateMpy?: number;
  /** As-removed observation: false means the technician recorded "no pitting". */
  pittingObserved?: boolean;
  /** Deepest pit measured by the lab, mm. */
  maxPitDepthMm?: number;
  /** Exposed area used for the rate (from the geometry), cm². */
  areaCm2?: number;
  densityGcm3?: number;
  resolutionMultiple?: number;
  blankRatio?: number;
  pittingFactorLimit?: number;
}

function fmt(value: number, digits = 4): string {
  return Number(value.toPrecision(digits)).toString();
}

/**
 * Flags for one coupon result (warnings first). Codes:
 * - `mass-gain` (warning): the coupon weighs more after cleaning than before;
 * - `blank-exceeds-loss` (warning): the blank lost more than the coupon;
 * - `cleaning-not-corrected` (warning): several cleaning cycles, but neither a blank nor the
 *   cleaning curve, so base metal removed by cleaning is counted as corrosion;
 * - `exposure-short` (warning): shorter than the owner's minimum exposure;
 * - `exposure-short-for-rate` (info): shorter than the ASTM G31 rule of thumb
 *   hours ≈ 2000 / mpy for the rate found;
 * - `loss-below-resolution` (warning): loss not above the weighing uncertainty;
 * - `loss-near-resolution` (info): loss under 10× the weighing uncertainty;
 * - `loss-near-blank` (warning): the blank lost at least half as much as the coupon's raw loss;
 * - `pitting-not-observed` (warning): "no pitting" recorded, but the measured pit
 *   gives a pitting factor at or above the limit (2);
 * - `pit-depth-missing` (info): pitting recorded but no pit depth measured;
 * - `pitting-factor-below-one` (info): the deepest pit is shallower than the
 *   average penetration, which points at a measurement or area error.
 *
 * Weighing uncertainty [der]: a mass loss is the difference of two weighings, each
 * uncertain by the balance resolution r, so (independent errors adding in quadrature)
 * the loss is uncertain by √2·r; with a blank subtracted the loss is
 * (m₀ − m₁) − (b₀ − b₁), four weighings, hence √4·r = 2r.
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
  const blank = input.blankLossG === undefined ? undefined : requireNonNegative("blankLossG", input.blankLossG);
  const raw =
    input.rawMassLossG === undefined ? loss + (blank ?? 0) : requireFinite("rawMassLossG", input.rawMassLossG);
  const flags: QualityFlag<CouponFlagCode>[] = [];

  if (raw < 0) {
    flags.push({
      code: "mass-gain",
      severity: "warning",
      message: `The coupon gained ${fmt(-raw)} g, so no corrosion rate can be determined. Deposits or corrosion product were probably not fully removed: re-clean and re-weigh the coupon, and check the weighings.`,
    });
  } else if (blank !== undefined && blank > raw) {
    flags.push({
      code: "blank-exceeds-loss",
      severity: "warning",
      message: `The blank lost ${fmt(blank)} g, more than the coupon's ${fmt(raw)} g, so no corrosion rate can be determined. Check the blank (same alloy, same cleaning), re-clean if needed and check the weighings.`,
    });
  }

  const cycles = input.cleaningCycles === undefined ? 0 : requireNonNegative("cleaningCycles", input.cleaningCycles);
  if (cycles >= 2 && input.cleaningCorrected !== true) {
    flags.push({
      code: "cleaning-not-corrected",
      severity: "warning",
      message: `${fmt(cycles)} cleaning cycles were entered with neither a blank nor a cleaning curve, so base metal removed by the cleaning is counted as corrosion and the rate reads high. Enter the blank's masses or choose the base-metal cycles.`,
    });
  }

  if (hours < minimumHours) {
    flags.push({
      code: "exposure-short",
      severity: "warning",
      message: `The exposure of ${fmt(hours / 24, 3)} days is shorter than the minimum of ${fmt(minimumHours / 24, 3)} days. Short exposures read high because early corrosion is faster.`,
    });
  }

  if (input.rateMpy !== undefined) {
    const mpy = requireNonNegative("rateMpy", input.rateMpy);
    if (mpy > 0) {
      const suggested = G31_DURATION_CONSTANT_HOURS_MPY / mpy;
      if (hours < G31_DURATION_TOLERANCE * suggested) {
        flags.push({
          code: "exposure-short-for-rate",
          severity: "info",
          message: `For a rate of ${fmt(mpy, 3)} mpy the ASTM G31 rule of thumb (hours ≈ 2000 / mpy) suggests about ${fmt(suggested / 24, 3)} days of exposure; this one lasted ${fmt(hours / 24, 3)} days, more than 10 % short.`,
        });
      }
    }
  }

  if (input.balanceResolutionG !== undefined && loss >= 0 && raw >= 0) {
    const resolution = requirePositive("balanceResolutionG", input.balanceResolutionG);
    const weighings = blank !== undefined ? 4 : 2;
    const uncertainty = Math.sqrt(weighings) * resolution;
    const how = `${weighings === 4 ? "2" : "√2"} × the balance resolution of ${fmt(resolution)} g (${weighings} weighings)`;
    if (loss <= uncertainty) {
      flags.push({
        code: "loss-below-resolution",
        severity: "warning",
        message: `The mass loss of ${fmt(loss)} g is not above its weighing uncertainty of ${fmt(uncertainty)} g, ${how}, so it cannot be told apart from zero.`,
      });
    } else if (loss < resolutionMultiple * uncertainty) {
      flags.push({
        code: "loss-near-resolution",
        severity: "info",
        message: `The mass loss of ${fmt(loss)} g is less than ${fmt(resolutionMultiple)} times its weighing uncertainty of ${fmt(uncertainty)} g, ${how}; the rate carries a large weighing uncertainty.`,
      });
    }
  }

  if (blank !== undefined && raw > 0 && blank >= 0 && blank <= raw) {
    if (blank > 0 && blank >= blankRatio * raw) {
      flags.push({
        code: "loss-near-blank",
        severity: "warning",
        message: `The blank lost ${fmt(blank)} g against ${fmt(raw)} g for the coupon before correction, so the cleaning itself accounts for half or more of the loss. Check that coupon and blank were cleaned the same way.`,
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
  /** The circuit's required thickness, mm (API 570: the greater of pressure design and structural minimum). */
  requiredThicknessMm?: number | null;
  /** The display resolution of the instrument that took the latest reading, mm. */
  instrumentResolutionMm?: number | null;
}

/**
 * Flags for the thickness readings of one CML (warnings first). Readings are
 * validated as for thicknessRates (oldest first, one per day). Codes:
 * - `thickness-growth` (warning): the wall grew between two surveys by more than the
 *   tolerance — a measurement artefact, never a negative rate;
 * - `rate-jump` (warning): the latest interval lost wall more than `jumpFactor` times
 *   faster than the CML's earlier history;
 * - `few-readings` (info): only two points, so there is no history to compare and no
 *   regression interval;
 * - with `requiredThicknessMm`: `below-required` (warning) when the latest reading is at
 *   or below it;
 * - with `instrumentResolutionMm`: `below-resolution` (info) when the latest reading
 *   differs from the one before by less than the resolution (no loss can be measured from
 *   that pair), and `finer-than-resolution` (warning) when the latest thickness is given
 *   to a finer step than the instrument displays.
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

  const latest = points[n - 1];
  flags.push(...latestReadingFlags(latest, points[n - 2], [latest.thicknessMm], options));
  return warningsFirst(flags);
}

/**
 * Tolerance when judging whether a value is a whole number of resolution steps: decimal
 * fractions such as 0.01 are not exact in binary, so 9.52 / 0.01 is 951.999… [der].
 */
const STEP_TOLERANCE = 1e-6;

/** Whether a value is a whole number of steps of the resolution. */
function onResolutionStep(valueMm: number, resolutionMm: number): boolean {
  const steps = valueMm / resolutionMm;
  return Math.abs(steps - Math.round(steps)) <= STEP_TOLERANCE * Math.max(1, Math.abs(steps));
}

/** The flags judged on the latest reading alone (and its predecessor, when there is one). */
function latestReadingFlags(
  latest: ThicknessReading,
  previous: ThicknessReading | undefined,
  typedMm: readonly number[],
  options: ThicknessQualityOptions | undefined,
): QualityFlag<ThicknessFlagCode>[] {
  const flags: QualityFlag<ThicknessFlagCode>[] = [];
  const required =
    options?.requiredThicknessMm === undefined || options.requiredThicknessMm === null
      ? null
      : requirePositive("options.requiredThicknessMm", options.requiredThicknessMm);
  const resolution =
    options?.instrumentResolutionMm === undefined || options.instrumentResolutionMm === null
      ? null
      : requirePositive("options.instrumentResolutionMm", options.instrumentResolutionMm);
  if (required !== null && latest.thicknessMm <= required) {
    flags.push({
      code: "below-required",
      severity: "warning",
      message: `The wall reads ${fmt(latest.thicknessMm)} mm on ${latest.date}, at or below the circuit's required thickness of ${fmt(required)} mm. Confirm the reading and tell the owner's engineer at once: the component may need repair or replacement before it stays in service.`,
    });
  }
  if (resolution !== null) {
    const coarse = typedMm.filter((v) => !onResolutionStep(v, resolution));
    if (coarse.length > 0) {
      flags.push({
        code: "finer-than-resolution",
        severity: "warning",
        message: `${coarse.map((v) => `${fmt(v, 6)} mm`).join(", ")} ${coarse.length === 1 ? "is" : "are"} given to a finer step than the instrument's resolution of ${fmt(resolution)} mm. Enter what the instrument displayed, or correct the resolution.`,
      });
    }
    if (previous !== undefined) {
      const change = Math.abs(previous.thicknessMm - latest.thicknessMm);
      // 10.0 − 9.9 is 0.0999… in binary: a change of one whole step is measurable [der].
      if (change < resolution * (1 - STEP_TOLERANCE)) {
        flags.push({
          code: "below-resolution",
          severity: "info",
          message: `The change of ${fmt(change)} mm since ${previous.date} is smaller than the instrument's resolution of ${fmt(resolution)} mm, so no loss can be measured from this pair of readings.`,
        });
      }
    }
  }
  return flags;
}

/** One new reading at a CML as a technician enters it in a survey. */
export interface SurveyReadingInput {
  /** The new reading: its date, its thickness (the minimum of the quadrant readings) and every value typed. */
  reading: ThicknessReading & { quadrantReadingsMm?: readonly number[] };
  /** The CML's approved readings since its base-line (after its latest replacement), oldest first. */
  history: readonly ThicknessReading[];
  /** The base-line thickness and date, when known (counts as the first point of the history). */
  baseline?: ThicknessReading | null;
  requiredThicknessMm?: number | null;
  instrumentResolutionMm?: number | null;
  measurementToleranceMm?: number;
  jumpFactor?: number;
}

/**
 * The quality flags of ONE new survey reading against its CML's approved history and
 * base-line: `thicknessQualityFlags` over the history with the new reading last, plus
 * the required-thickness and resolution checks (warnings first). With no earlier point
 * (no base-line, no approved reading) only the checks of the reading itself apply. The
 * survey grid (in the browser) and the submit (on the server) both call this.
 */
export function surveyReadingFlags(input: SurveyReadingInput): QualityFlag<ThicknessFlagCode>[] {
  requireObject("input", input);
  requireObject("reading", input.reading);
  if (!Array.isArray(input.history)) throw rangeError("history", "an array of { date, thicknessMm }", input.history);
  const reading: ThicknessReading = { date: input.reading.date, thicknessMm: input.reading.thicknessMm };
  parseIsoDay("reading.date", reading.date);
  requirePositive("reading.thicknessMm", reading.thicknessMm);
  const typed = input.reading.quadrantReadingsMm?.length
    ? [...input.reading.quadrantReadingsMm]
    : [reading.thicknessMm];
  typed.forEach((v, i) => requirePositive(`reading.quadrantReadingsMm[${i}]`, v));
  const history = [...input.history];
  const firstDay = history.length ? history[0].date : reading.date;
  // A base-line on or after the first reading adds no span (a same-day point would divide by zero).
  const baseline =
    input.baseline && parseIsoDay("baseline.date", input.baseline.date) < parseIsoDay("date", firstDay)
      ? input.baseline
      : undefined;
  const options: ThicknessQualityOptions = {
    initial: baseline,
    measurementToleranceMm: input.measurementToleranceMm,
    jumpFactor: input.jumpFactor,
    requiredThicknessMm: input.requiredThicknessMm,
    instrumentResolutionMm: input.instrumentResolutionMm,
  };
  if (history.length === 0 && baseline === undefined) {
    return warningsFirst(latestReadingFlags(reading, undefined, typed, options));
  }
  const series = [...history, reading];
  if (series.length === 1) {
    // Only the base-line before it: the pair (base-line, reading) is the whole history.
    const base = baseline as ThicknessReading;
    return thicknessQualityFlagsWithTyped([base, reading], { ...options, initial: undefined }, typed);
  }
  return thicknessQualityFlagsWithTyped(series, options, typed);
}

/** thicknessQualityFlags with the typed values of the latest reading judged against the resolution. */
function thicknessQualityFlagsWithTyped(
  readings: ThicknessReading[],
  options: ThicknessQualityOptions,
  typed: readonly number[],
): QualityFlag<ThicknessFlagCode>[] {
  const { instrumentResolutionMm, ...rest } = options;
  const flags = thicknessQualityFlags(readings, rest);
  const n = readings.length; // at least two: the callers put an earlier point first
  const resolutionFlags = latestReadingFlags(readings[n - 1], readings[n - 2], typed, { instrumentResolutionMm });
  return warningsFirst([...flags, ...resolutionFlags]);
}

/** Stable order: warnings before information, otherwise as found. */
function warningsFirst<T extends QualityFlag<string>>(flags: T[]): T[] {
  return flags.filter((f) => f.severity === "warning").concat(flags.filter((f) => f.severity === "info"));
}

/* ---------------------------------------------------------------- coupons against history */

/**
 * A coupon's general or pitting rate against the approved rates of that kind at the same
 * point [cp]: a rate at least `jumpFactor` times the median of the point's history, or at
 * most 1/`jumpFactor` of it, is flagged so the reviewer checks the weighings (or the pit
 * depths), the exposure and the service before approving. Needs at least two earlier results.
 */
export function historyJumpFlag(
  rateMmPerYear: number,
  historyMmPerYear: readonly number[],
  jumpFactor: number = QUALITY_DEFAULTS.jumpFactor,
  kind: "general" | "pitting" = "general",
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
    code: kind === "general" ? "history-jump" : "pitting-history-jump",
    severity: "warning",
    message:
      `The ${kind} rate of ${fmt(rateMmPerYear, 3)} mm/y is ${direction} the median of this point's ` +
      `${history.length} earlier approved ${kind} rates (${fmt(median, 3)} mm/y). ` +
      (kind === "general"
        ? "Check the weighings, the exposure dates and whether the service changed before approving."
        : "Check the pit depths and how they were measured, the exposure dates and whether the service changed before approving."),
  };
}
