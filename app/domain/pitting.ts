/**
 * Pitting: rate of the deepest pit and the pitting factor.
 *
 * Standards: ASTM G46 (examination and evaluation of pitting corrosion):
 * pitting rate = deepest pit depth annualised over the exposure [mem], on the
 * 8760-hour year of ASTM G1 so it sits beside the general rate; pitting
 * factor = deepest pit / average penetration, with the average penetration
 * from mass loss d = W/(D·A) [pub definition, der]. NACE SP0775 grades the
 * pitting rate (see severity.ts).
 */

import { HOURS_PER_YEAR, MM_PER_MIL } from "./units.ts";
import { requireNonNegative, requireObject, requirePositive, FieldRangeError } from "./validate.ts";

export interface PittingRateInput {
  /** Depth of the deepest pit, mm. 0 (no pit) gives a zero rate. */
  maxPitDepthMm: number;
  /** Exposure time, h. */
  exposureHours: number;
  /** Optional coupon thickness, mm: a pit deeper than the coupon is impossible and throws. */
  couponThicknessMm?: number;
}

/** A pit can perforate the coupon (depth = thickness) but never be deeper. */
function checkPitFitsCoupon(depth: number, thickness: number | undefined): void {
  if (thickness === undefined) return;
  const t = requirePositive("couponThicknessMm", thickness);
  if (depth > t) {
    throw new FieldRangeError(
      "maxPitDepthMm",
      `maxPitDepthMm must be <= couponThicknessMm ${t} (got ${depth}): a pit cannot be deeper than the coupon`,
    );
  }
}

/** Pitting rate of the deepest pit, ASTM G46: depth × 8760 / hours, in mm/y and mpy (exact path). */
export function pittingRate(input: PittingRateInput): { mmPerYear: number; mpy: number } {
  requireObject("input", input);
  const depth = requireNonNegative("maxPitDepthMm", input.maxPitDepthMm);
  const hours = requirePositive("exposureHours", input.exposureHours);
  checkPitFitsCoupon(depth, input.couponThicknessMm);
  const mmPerYear = (depth * HOURS_PER_YEAR) / hours;
  return { mmPerYear, mpy: mmPerYear / MM_PER_MIL };
}

export interface PittingFactorInput {
  maxPitDepthMm: number;
  /** Mass loss, g; must be > 0 (a pitting factor of a coupon that lost nothing is undefined). */
  massLossG: number;
  areaCm2: number;
  densityGcm3: number;
  couponThicknessMm?: number;
}

/**
 * Average penetration from mass loss, mm: d = W/(D·A) (cm) × 10. The same
 * depth the weight-loss rate annualises.
 */
export function averagePenetrationMm(massLossG: number, areaCm2: number, densityGcm3: number): number {
  const W = requireNonNegative("massLossG", massLossG);
  const A = requirePositive("areaCm2", areaCm2);
  const D = requirePositive("densityGcm3", densityGcm3);
  return (W / (D * A)) * 10;
}

/**
 * Pitting factor, ASTM G46: deepest pit / average penetration. 1 means
 * uniform attack; larger means more localised. Zero mass loss throws (the
 * ratio has no meaning), as does a pit deeper than the coupon when its
 * thickness is given.
 */
export function pittingFactor(input: PittingFactorInput): number {
  requireObject("input", input);
  const depth = requireNonNegative("maxPitDepthMm", input.maxPitDepthMm);
  if (typeof input.massLossG === "number" && input.massLossG === 0) {
    throw new FieldRangeError(
      "massLossG",
      "massLossG must be > 0 for a pitting factor (got 0): with no mass loss the average penetration is zero",
    );
  }
  const W = requirePositive("massLossG", input.massLossG);
  const A = requirePositive("areaCm2", input.areaCm2);
  const D = requirePositive("densityGcm3", input.densityGcm3);
  checkPitFitsCoupon(depth, input.couponThicknessMm);
  return depth / ((W / (D * A)) * 10);
}
