/**
 * Regression corrosion rate of a CML over all its readings, with a
 * confidence interval, and the conservative remaining life it supports.
 *
 * Method: ordinary least squares of wall thickness on time (years of 365.25
 * days since the first reading), slope standard error s_b = √(SSE/(n−2)/Sxx)
 * and a two-sided Student-t interval b ± t(1−α/2, n−2)·s_b — as in the
 * NIST/SEMATECH e-Handbook of Statistical Methods §4.1.4.1 (linear least
 * squares) and §1.3.6.7.2 (critical values of Student's t) [pub].
 * The t quantile is computed, not tabulated: Student's t CDF through the
 * regularised incomplete beta function (continued fraction, Lentz's method,
 * as in Press et al., Numerical Recipes §6.4) with a Lanczos log-gamma
 * (§6.1), inverted by bisection [der].
 *
 * API 570 remaining life uses point rates; the regression adds an upper
 * bound on the rate, so the outlook can show a conservative remaining life
 * beside the best estimate. A wall that appears to grow gives a loss rate
 * of 0 (never negative), with `grew: true`.
 */

import { DAYS_PER_YEAR_THICKNESS } from "./units.ts";
import { parseIsoDay } from "./dates.ts";
import { remainingLife } from "./piping.ts";
import type { ThicknessReading } from "./piping.ts";
import { rangeError, requireObject, requirePositive, FieldRangeError } from "./validate.ts";

/* ---------------------------------------------------------------- Student's t */

/** ln Γ(x) for x > 0, Lanczos approximation (g = 7, 9 terms), relative error ≈ 1e-15. */
function logGamma(x: number): number {
  const c = [
    0.99999999999980993, 676.5203681218851, -1259.1392167224028, 771.32342877765313, -176.61502916214059,
    12.507343278686905, -0.13857109526572012, 9.9843695780195716e-6, 1.5056327351493116e-7,
  ];
  if (x < 0.5) return Math.log(Math.PI / Math.sin(Math.PI * x)) - logGamma(1 - x); // reflection
  const z = x - 1;
  let a = c[0];
  const t = z + 7.5;
  for (let i = 1; i < 9; i++) a += c[i] / (z + i);
  return 0.5 * Math.log(2 * Math.PI) + (z + 0.5) * Math.log(t) - t + Math.log(a);
}

/** Continued fraction for the incomplete beta function (modified Lentz). */
function betaContinuedFraction(x: number, a: number, b: number): number {
  const TINY = 1e-300;
  let c = 1;
  let d = 1 - ((a + b) * x) / (a + 1);
  if (Math.abs(d) < TINY) d = TINY;
  d = 1 / d;
  let h = d;
  /** One Lentz update with the fraction's next coefficient; returns the factor applied to h. */
  const step = (aa: number): number => {
    d = 1 + aa * d;
    if (Math.abs(d) < TINY) d = TINY;
    c = 1 + aa / c;
    if (Math.abs(c) < TINY) c = TINY;
    d = 1 / d;
    h *= d * c;
    return d * c;
  };
  for (let m = 1; m <= 300; m++) {
    const m2 = 2 * m;
    step((m * (b - m) * x) / ((a + m2 - 1) * (a + m2))); // even coefficient
    const delta = step((-(a + m) * (a + b + m) * x) / ((a + m2) * (a + m2 + 1))); // odd coefficient
    if (Math.abs(delta - 1) < 1e-15) break;
  }
  return h;
}

/** Regularised incomplete beta I_x(a, b). */
function regularizedBeta(x: number, a: number, b: number): number {
  if (x <= 0) return 0;
  if (x >= 1) return 1;
  const front = Math.exp(logGamma(a + b) - logGamma(a) - logGamma(b) + a * Math.log(x) + b * Math.log(1 - x));
  // The continued fraction converges fast for x < (a+1)/(a+b+2); use the symmetry otherwise.
  if (x < (a + 1) / (a + b + 2)) return (front * betaContinuedFraction(x, a, b)) / a;
  return 1 - (front * betaContinuedFraction(1 - x, b, a)) / b;
}

/** Student's t cumulative distribution P(T ≤ t) with `df` degrees of freedom. */
function studentTCdf(t: number, df: number): number {
  requirePositive("df", df);
  if (typeof t !== "number" || Number.isNaN(t)) throw rangeError("t", "a number", t);
  if (t === Infinity) return 1;
  if (t === -Infinity) return 0;
  const tail = 0.5 * regularizedBeta(df / (df + t * t), df / 2, 0.5);
  return t >= 0 ? 1 - tail : tail;
}

/**
 * Quantile of Student's t: the t with P(T ≤ t) = p, for 0 < p < 1.
 * Bisection on the CDF to 1e-12 relative; not on a hot path.
 */
export function studentTQuantile(p: number, df: number): number {
  if (typeof p !== "number" || !(p > 0) || !(p < 1)) throw rangeError("p", "> 0 and < 1", p);
  requirePositive("df", df);
  if (p === 0.5) return 0;
  if (p < 0.5) return -studentTQuantile(1 - p, df);
  let lo = 0;
  let hi = 1;
  while (studentTCdf(hi, df) < p) {
    lo = hi;
    hi *= 2;
    if (hi > 1e12) return hi; // p indistinguishable from 1 at this df
  }
  for (let i = 0; i < 200 && hi - lo > 1e-12 * hi; i++) {
    const mid = (lo + hi) / 2;
    if (studentTCdf(mid, df) < p) lo = mid;
    else hi = mid;
  }
  return (lo + hi) / 2;
}

/* ---------------------------------------------------------------- regression rate */

export interface RegressionRate {
  /** Best-estimate wall-loss rate, mm/y (≥ 0; 0 when the fit shows growth). */
  mmPerYear: number;
  /** Lower end of the confidence interval on the loss rate, mm/y (≥ 0). */
  lowerMmPerYear: number;
  /** Upper end of the confidence interval on the loss rate, mm/y (≥ 0): the conservative rate. */
  upperMmPerYear: number;
  /** The fitted slope itself, thickness change in mm per year (negative = loss). */
  slopeMmPerYear: number;
  /** Standard error of the slope, mm/y. */
  standardErrorMmPerYear: number;
  /** Two-sided confidence level of the interval, e.g. 0.95. */
  confidence: number;
  /** Student-t critical value t(1 − α/2, n − 2). */
  tCritical: number;
  degreesOfFreedom: number;
  /** Number of readings used. */
  n: number;
  /** Thickness the fitted line gives at the last reading's date, mm. */
  fittedThicknessAtLastMm: number;
  /** Coefficient of determination (1 when every reading is equal). */
  rSquared: number;
  /** True when the fitted slope shows the wall growing. */
  grew: boolean;
  /** The method, for the calculation basis and reports. */
  method: string;
}

export const REGRESSION_METHOD =
  "Ordinary least squares of thickness on time (365.25-day years), two-sided Student-t interval on the slope " +
  "(NIST/SEMATECH e-Handbook of Statistical Methods §4.1.4.1, §1.3.6.7.2)";

/**
 * Regression wall-loss rate over all readings of a CML, with a two-sided
 * confidence interval (default 95 %). Needs at least 3 readings on at least
 * 2 different dates (n − 2 ≥ 1 degree of freedom); readings oldest first.
 * Repeat readings on the same day are allowed here (they add information to
 * a fit) — unlike thicknessRates, where a same-day pair has no time span.
 */
export function regressionRate(readings: ThicknessReading[], options?: { confidence?: number }): RegressionRate {
  if (!Array.isArray(readings)) throw rangeError("readings", "an array of { date, thicknessMm }", readings);
  const n = readings.length;
  if (n < 3)
    throw new FieldRangeError(
      "readings",
      `readings must have at least 3 readings for a regression with an interval (got ${n})`,
    );
  let confidence = 0.95;
  if (options !== undefined) {
    requireObject("options", options);
    if (options.confidence !== undefined) {
      const c = options.confidence;
      if (typeof c !== "number" || !(c > 0) || !(c < 1)) throw rangeError("options.confidence", "> 0 and < 1", c);
      confidence = c;
    }
  }

  const x = new Array<number>(n);
  const y = new Array<number>(n);
  let firstDay = 0;
  let previousDay = 0;
  for (let i = 0; i < n; i++) {
    const r = readings[i];
    if (r === null || typeof r !== "object") throw rangeError(`readings[${i}]`, "an object { date, thicknessMm }", r);
    const day = parseIsoDay(`readings[${i}].date`, r.date);
    y[i] = requirePositive(`readings[${i}].thicknessMm`, r.thicknessMm);
    if (i === 0) firstDay = day;
    else if (day < previousDay) {
      throw new FieldRangeError(
        "readings",
        `readings[${i}].date must not be earlier than readings[${i - 1}].date ${readings[i - 1].date} (got "${r.date}"): readings go oldest first`,
      );
    }
    previousDay = day;
    x[i] = (day - firstDay) / DAYS_PER_YEAR_THICKNESS;
  }
  if (previousDay === firstDay) {
    throw new FieldRangeError("readings", "readings must span at least 2 different dates (got all on one day)");
  }

  let mx = 0;
  let my = 0;
  for (let i = 0; i < n; i++) {
    mx += x[i];
    my += y[i];
  }
  mx /= n;
  my /= n;
  let sxx = 0;
  let sxy = 0;
  let syy = 0;
  for (let i = 0; i < n; i++) {
    const dx = x[i] - mx;
    const dy = y[i] - my;
    sxx += dx * dx;
    sxy += dx * dy;
    syy += dy * dy;
  }
  const slope = sxy / sxx;
  const intercept = my - slope * mx;
  // SSE = Syy − b·Sxy; clamp the rounding residue of a perfect fit at 0.
  const sse = Math.max(0, syy - slope * sxy);
  const df = n - 2;
  const se = Math.sqrt(sse / df / sxx);
  const tCritical = studentTQuantile(1 - (1 - confidence) / 2, df);
  const loss = -slope;
  const half = tCritical * se;
  return {
    mmPerYear: Math.max(0, loss),
    lowerMmPerYear: Math.max(0, loss - half),
    upperMmPerYear: Math.max(0, loss + half),
    slopeMmPerYear: slope,
    standardErrorMmPerYear: se,
    confidence,
    tCritical,
    degreesOfFreedom: df,
    n,
    fittedThicknessAtLastMm: intercept + slope * x[n - 1],
    rSquared: syy > 0 ? Math.min(1, Math.max(0, 1 - sse / syy)) : 1,
    grew: slope > 0,
    method: REGRESSION_METHOD,
  };
}

/**
 * Remaining life from a regression rate: the best estimate (point rate) and
 * the conservative figure (upper end of the rate's confidence interval),
 * both by API 570 remaining life; the conservative one is never longer.
 */
export function conservativeRemainingLife(input: {
  actualMm: number;
  requiredMm: number;
  regression: Pick<RegressionRate, "mmPerYear" | "upperMmPerYear">;
}): { bestEstimateYears: number; conservativeYears: number } {
  requireObject("input", input);
  requireObject("regression", input.regression);
  const best = remainingLife({
    actualMm: input.actualMm,
    requiredMm: input.requiredMm,
    rateMmPerYear: input.regression.mmPerYear,
  });
  const upper = input.regression.upperMmPerYear;
  if (typeof upper !== "number" || !(upper >= input.regression.mmPerYear)) {
    throw rangeError("regression.upperMmPerYear", `>= regression.mmPerYear ${input.regression.mmPerYear}`, upper);
  }
  const conservative = remainingLife({ actualMm: input.actualMm, requiredMm: input.requiredMm, rateMmPerYear: upper });
  return { bestEstimateYears: best, conservativeYears: conservative };
}
