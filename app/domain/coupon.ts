/**
 * Weight-loss coupons: exposed area, corrosion rate, blank and cleaning-cycle
 * corrections.
 *
 * Standards: ASTM G1 §7 (repeated cleaning cycles, extrapolation of the
 * base-metal segment to zero cycles) and §8 (CR = K·W/(A·T·D), 8760-hour
 * year); ASTM G31 and NACE SP0775 (coupon practice, blank correction).
 * Areas follow from the coupon geometry [der].
 */

import { HOURS_PER_YEAR, MM_PER_MIL } from "./units.ts";
import {
  rangeError,
  requireInteger,
  requireNonNegative,
  requireObject,
  requirePositive,
  requireFinite,
  FieldRangeError,
} from "./validate.ts";

/* ---------------------------------------------------------------- area */

/** Coupon geometries Wallcast knows. Dimensions in mm; `holeDiameterMm: 0` (or absent) means no hole. */
export type CouponGeometry =
  | { shape: "strip"; lengthMm: number; widthMm: number; thicknessMm: number; holeDiameterMm?: number }
  | { shape: "disc"; diameterMm: number; thicknessMm: number; holeDiameterMm?: number }
  | { shape: "rod"; diameterMm: number; lengthMm: number; exposedEnds: 0 | 1 | 2 }
  | { shape: "flush-disc"; diameterMm: number };

export const COUPON_SHAPES = ["strip", "disc", "rod", "flush-disc"] as const;

/**
 * Exposed area of a coupon in cm² [der]:
 * - strip, one mounting hole: 2(LW + Lt + Wt) − 2·πd²/4 + π·d·t
 * - disc, centre hole: (π/2)(D² − d²) + π·D·t + π·d·t
 * - rod: π·D·L plus π·D²/4 per exposed end
 * - flush disc (one face wetted): π·D²/4
 * A hole at least as wide as the strip (or disc) is impossible and throws.
 */
export function couponArea(g: CouponGeometry): number {
  requireObject("geometry", g);
  const PI = Math.PI;
  let mm2: number;
  switch (g.shape) {
    case "strip": {
      const L = requirePositive("lengthMm", g.lengthMm);
      const W = requirePositive("widthMm", g.widthMm);
      const t = requirePositive("thicknessMm", g.thicknessMm);
      const d = g.holeDiameterMm === undefined ? 0 : requireNonNegative("holeDiameterMm", g.holeDiameterMm);
      const narrowest = Math.min(L, W);
      if (d >= narrowest) {
        const side = W <= L ? "widthMm" : "lengthMm";
        throw new FieldRangeError(
          "holeDiameterMm",
          `holeDiameterMm must be < ${side} ${narrowest} (got ${d}): the hole would be wider than the strip`,
        );
      }
      mm2 = 2 * (L * W + L * t + W * t) - (2 * PI * d * d) / 4 + PI * d * t;
      break;
    }
    case "disc": {
      const D = requirePositive("diameterMm", g.diameterMm);
      const t = requirePositive("thicknessMm", g.thicknessMm);
      const d = g.holeDiameterMm === undefined ? 0 : requireNonNegative("holeDiameterMm", g.holeDiameterMm);
      if (d >= D) {
        throw new FieldRangeError(
          "holeDiameterMm",
          `holeDiameterMm must be < diameterMm ${D} (got ${d}): the hole would be wider than the disc`,
        );
      }
      mm2 = (PI / 2) * (D * D - d * d) + PI * D * t + PI * d * t;
      break;
    }
    case "rod": {
      const D = requirePositive("diameterMm", g.diameterMm);
      const L = requirePositive("lengthMm", g.lengthMm);
      const ends = requireInteger("exposedEnds", g.exposedEnds, 0, 2);
      mm2 = PI * D * L + (ends * PI * D * D) / 4;
      break;
    }
    case "flush-disc": {
      const D = requirePositive("diameterMm", g.diameterMm);
      mm2 = (PI * D * D) / 4;
      break;
    }
    default:
      throw rangeError(
        "shape",
        `one of ${COUPON_SHAPES.map((s) => `"${s}"`).join(", ")}`,
        (g as { shape?: unknown }).shape,
      );
  }
  return mm2 / 100; // mm² → cm²
}

/* ---------------------------------------------------------------- rate */

export interface WeightLossInput {
  /** Mass lost during the exposure, g (after blank correction). 0 gives a zero rate; a gain throws. */
  massLossG: number;
  /** Exposed area, cm². */
  areaCm2: number;
  /** Exposure time, h. */
  exposureHours: number;
  /** Density of the coupon material, g/cm³. */
  densityGcm3: number;
}

export interface WeightLossRate {
  mmPerYear: number;
  mpy: number;
  umPerYear: number;
  /** mg/(dm²·day). */
  mdd: number;
  gPerM2PerHour: number;
}

/**
 * Uniform corrosion rate from mass loss, ASTM G1 §8: CR = K·W/(A·T·D) with
 * K = 8.76×10⁴ for mm/y on the 8760-hour year. mpy = mm/y ÷ 0.0254 (exact
 * path, see units.ts). mdd and g/(m²·h) do not depend on density.
 *
 * A negative mass loss (the coupon gained mass) throws: a gain is a quality
 * flag, never a negative rate.
 */
export function weightLossRate(input: WeightLossInput): WeightLossRate {
  requireObject("input", input);
  const W = requireNonNegative("massLossG", input.massLossG);
  const A = requirePositive("areaCm2", input.areaCm2);
  const T = requirePositive("exposureHours", input.exposureHours);
  const D = requirePositive("densityGcm3", input.densityGcm3);
  const massPerAreaTime = W / (A * T); // g/(cm²·h)
  const mmPerYear = (massPerAreaTime * 10 * HOURS_PER_YEAR) / D;
  return {
    mmPerYear,
    mpy: mmPerYear / MM_PER_MIL,
    umPerYear: mmPerYear * 1000,
    mdd: massPerAreaTime * 2.4e6, // 1000 mg/g × 100 cm²/dm² × 24 h/d
    gPerM2PerHour: massPerAreaTime * 1e4, // 10⁴ cm²/m²
  };
}

/* ---------------------------------------------------------------- mass loss helpers */

/**
 * Mass change of a coupon, g: initial − final. Positive is a loss; a negative
 * result is a mass gain, which the quality flags report (weightLossRate
 * refuses it).
 */
export function massLoss(initialMassG: number, finalMassG: number): number {
  requirePositive("initialMassG", initialMassG);
  requirePositive("finalMassG", finalMassG);
  return initialMassG - finalMassG;
}

/**
 * Blank-corrected mass loss, g: the test coupon's loss minus the loss of the
 * blank (control coupon) cleaned with the same method and number of cycles,
 * which is metal the cleaning itself removed (ASTM G1, NACE SP0775).
 * A blank that lost more than the coupon means the correction is not valid
 * for this pair: it throws rather than return a negative loss.
 */
export function blankCorrectedMassLoss(couponLossG: number, blankLossG: number): number {
  const coupon = requireNonNegative("couponLossG", couponLossG);
  const blank = requireNonNegative("blankLossG", blankLossG);
  if (blank > coupon) {
    throw new FieldRangeError(
      "blankLossG",
      `blankLossG must be <= couponLossG ${coupon} (got ${blank}): the control coupon lost more than the test coupon; review the cleaning`,
    );
  }
  return coupon - blank;
}

/* ---------------------------------------------------------------- cleaning cycles */

export interface CleaningCurveResult {
  /** Slope of the base-metal segment, g per cleaning cycle. */
  slopeGPerCycle: number;
  /** The fitted base-metal line at zero cycles: the loss due to corrosion, g. */
  correctedLossG: number;
}

/**
 * ASTM G1 §7 cleaning-cycle correction. Repeated cleaning removes corrosion
 * product first, then base metal at a steady rate; a straight line fitted by
 * least squares through the base-metal cycles, extrapolated to zero cycles,
 * gives the mass lost to corrosion.
 *
 * @param cumulativeLossG cumulative mass loss after cycle 1, 2, … (g); x = cycle number, 1-based
 * @param baseMetalFromCycle first cycle (1-based) of the straight base-metal segment; the fit uses
 *   every cycle from there on and needs at least two points
 */
export function cleaningCurveCorrection(cumulativeLossG: number[], baseMetalFromCycle: number): CleaningCurveResult {
  if (!Array.isArray(cumulativeLossG)) throw rangeError("cumulativeLossG", "an array of losses in g", cumulativeLossG);
  const n = cumulativeLossG.length;
  if (n < 2) {
    throw new FieldRangeError("cumulativeLossG", `cumulativeLossG must have at least 2 cycles (got ${n})`);
  }
  for (let i = 0; i < n; i++) requireNonNegative(`cumulativeLossG[${i}]`, cumulativeLossG[i]);
  const first = requireInteger("baseMetalFromCycle", baseMetalFromCycle, 1, n - 1);

  // Least squares over x = first … n (cycle numbers), y = cumulative loss.
  let sx = 0;
  let sy = 0;
  const count = n - first + 1;
  for (let x = first; x <= n; x++) {
    sx += x;
    sy += cumulativeLossG[x - 1];
  }
  const mx = sx / count;
  const my = sy / count;
  let sxx = 0;
  let sxy = 0;
  for (let x = first; x <= n; x++) {
    const dx = x - mx;
    sxx += dx * dx;
    sxy += dx * (cumulativeLossG[x - 1] - my);
  }
  const slope = sxy / sxx;
  let intercept = my - slope * mx;
  requireFinite("correctedLossG", intercept);
  // A line through the origin can land a few ulps below zero; that is zero, not an error.
  let largest = 0;
  for (let i = 0; i < n; i++) if (cumulativeLossG[i] > largest) largest = cumulativeLossG[i];
  if (intercept < 0 && -intercept <= 1e-9 * largest) intercept = 0;
  if (intercept < 0) {
    throw new FieldRangeError(
      "cumulativeLossG",
      `cumulativeLossG from cycle ${first} extrapolates to a negative loss at zero cycles (${intercept} g): ` +
        "those cycles are not a straight base-metal segment; choose baseMetalFromCycle again",
    );
  }
  return { slopeGPerCycle: slope, correctedLossG: intercept };
}
