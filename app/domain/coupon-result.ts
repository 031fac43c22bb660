/**
 * One coupon pull, evaluated end to end: exposed area, mass loss (final mass, blank-
 * corrected, or the ASTM G1 §7 cleaning-cycle curve), the weight-loss rate (ASTM G1 §8 /
 * G31), pitting rate and factor (ASTM G46), both NACE SP0775 severity categories, the
 * quality flags and the calculation basis.
 *
 * The lab-results form previews with this function in the browser and the server
 * recomputes with it on save and submit, so the two always agree. Problems with the
 * inputs come back as field errors keyed by the form's field names, in words.
 */
import { calculationBasis, type CalculationBasis } from "./basis.ts";
import {
  blankCorrectedMassLoss,
  cleaningCurveCorrection,
  couponArea,
  weightLossRate,
  type CouponGeometry,
  type WeightLossRate,
} from "./coupon.ts";
import { pittingFactor, pittingRate } from "./pitting.ts";
import { couponQualityFlags, historyJumpFlag, type CouponFlagCode, type QualityFlag } from "./quality.ts";
import { severity, worseSeverity, type Severity, type SeverityThresholds } from "./severity.ts";

const COUPON_RESULT_VERSION = "coupon-result 1.0.0";

export type CouponResultInput = {
  geometry: CouponGeometry;
  densityGcm3: number;
  densitySource: string;
  initialMassG: number;
  balanceResolutionG: number;
  /** ISO 8601 instants. */
  installedAt: string;
  removedAt: string;
  /** Coupon mass after each cleaning cycle (cumulative cleaning), g; may be empty when only a final mass is known. */
  couponMassesG: number[];
  finalMassG?: number | null;
  /** The blank (control coupon) cleaned alongside: its mass before cleaning and after each cycle, g. */
  blankInitialMassG?: number | null;
  blankMassesG?: number[];
  /** First cycle on the straight base-metal segment; set it to use the cleaning-curve method (needs ≥ 2 cycles from there). */
  baseMetalFromCycle?: number | null;
  pitDepthsMm?: number[];
  /** As-removed observation; false = "no pitting seen". */
  pittingVisible?: boolean | null;
  generalThresholds?: SeverityThresholds;
  pittingThresholds?: SeverityThresholds;
  minimumExposureDays?: number;
  /** General rates of the point's earlier approved results, mm/y, for the history check. */
  historyMmPerYear?: number[];
};

export type MassLossMethod = "final-mass" | "blank-corrected" | "cleaning-curve";

export type CouponResult = {
  version: string;
  areaCm2: number;
  exposureHours: number;
  exposureDays: number;
  massLoss: {
    method: MassLossMethod;
    /** initial − final (negative: the coupon gained mass). */
    rawG: number;
    blankLossG: number | null;
    slopeGPerCycle: number | null;
    /** The loss the rate is computed from (never negative). */
    correctedG: number;
  };
  rate: WeightLossRate;
  pitting: { maxPitDepthMm: number; mmPerYear: number; mpy: number; factor: number | null } | null;
  severity: { general: Severity; pitting: Severity | null; worst: Severity; worstKind: "general" | "pitting" };
  flags: QualityFlag<CouponFlagCode>[];
  basis: CalculationBasis & {
    thresholds: { general: SeverityThresholds | "NACE SP0775"; pitting: SeverityThresholds | "NACE SP0775" };
  };
};

export type CouponResultOutcome = { ok: true; result: CouponResult } | { ok: false; errors: Record<string, string> };

const isNum = (v: unknown): v is number => typeof v === "number" && Number.isFinite(v);

/** Turns a library RangeError ("densityGcm3 must be > 0 (got 0)") into a field error. */
function fieldOf(message: string): string {
  const name = /^([A-Za-z]+)/.exec(message)?.[1] ?? "";
  const map: Record<string, string> = {
    lengthMm: "geometry",
    widthMm: "geometry",
    thicknessMm: "geometry",
    diameterMm: "geometry",
    holeDiameterMm: "geometry",
    exposedEnds: "geometry",
    areaCm2: "geometry",
    densityGcm3: "density",
    exposureHours: "removedAt",
    cumulativeLossG: "couponMassesG",
    baseMetalFromCycle: "baseMetalFromCycle",
    blankLossG: "blankMassesG",
    couponLossG: "couponMassesG",
    maxPitDepthMm: "pitDepthsMm",
    massLossG: "couponMassesG",
  };
  return map[name] ?? "form";
}

export function evaluateCouponResult(input: CouponResultInput): CouponResultOutcome {
  const errors: Record<string, string> = {};
  const installed = Date.parse(input.installedAt);
  const removed = Date.parse(input.removedAt);
  if (!Number.isFinite(installed)) errors.installedAt = "The installation time is missing or not a date and time.";
  if (!Number.isFinite(removed)) errors.removedAt = "The removal time is missing or not a date and time.";
  else if (Number.isFinite(installed) && removed <= installed)
    errors.removedAt = "The removal time must be after the installation time.";

  const masses = input.couponMassesG ?? [];
  const blanks = input.blankMassesG ?? [];
  masses.forEach((m, i) => {
    if (!isNum(m) || m <= 0)
      errors.couponMassesG = `Cycle ${i + 1}: the coupon mass must be a positive number of grams.`;
  });
  for (let i = 1; i < masses.length; i++) {
    if (masses[i] > masses[i - 1])
      errors.couponMassesG = `Cycle ${i + 1}: the mass went up after cleaning (${masses[i - 1]} g → ${masses[i]} g); cleaning only removes metal.`;
  }
  const final = masses.length > 0 ? masses[masses.length - 1] : input.finalMassG;
  if (masses.length === 0 && (!isNum(final) || final <= 0))
    errors.finalMassG = "Enter the final mass, or the mass after each cleaning cycle.";
  if (!isNum(input.initialMassG) || input.initialMassG <= 0)
    errors.initialMassG = "The coupon's initial mass is missing.";

  const hasBlank = input.blankInitialMassG !== null && input.blankInitialMassG !== undefined;
  if (hasBlank) {
    if (!isNum(input.blankInitialMassG) || input.blankInitialMassG <= 0)
      errors.blankInitialMassG = "The blank's mass before cleaning must be a positive number of grams.";
    if (blanks.length === 0)
      errors.blankMassesG = "Enter the blank's mass after each cleaning cycle (the same cycles as the coupon).";
    else if (masses.length > 0 && blanks.length !== masses.length)
      errors.blankMassesG = `The blank has ${blanks.length} cycle(s) but the coupon has ${masses.length}: clean both the same way.`;
    blanks.forEach((m, i) => {
      if (!isNum(m) || m <= 0)
        errors.blankMassesG = `Cycle ${i + 1}: the blank mass must be a positive number of grams.`;
    });
  } else if (blanks.length > 0) {
    errors.blankInitialMassG = "Enter the blank's mass before cleaning, or clear the blank's cycles.";
  }

  const pits = input.pitDepthsMm ?? [];
  pits.forEach((d) => {
    if (!isNum(d) || d < 0) errors.pitDepthsMm = "Pit depths must be numbers of millimetres, zero or more.";
  });
  const couponThickness = "thicknessMm" in input.geometry ? input.geometry.thicknessMm : undefined;
  const deepest = pits.length ? Math.max(...pits) : undefined;
  if (isNum(deepest) && isNum(couponThickness) && deepest > couponThickness)
    errors.pitDepthsMm = `A pit of ${deepest} mm is deeper than the coupon is thick (${couponThickness} mm).`;

  const cycleFrom = input.baseMetalFromCycle;
  if (cycleFrom !== null && cycleFrom !== undefined) {
    if (!Number.isInteger(cycleFrom) || cycleFrom < 1 || cycleFrom > masses.length - 1)
      errors.baseMetalFromCycle =
        masses.length < 2
          ? "The cleaning-curve method needs at least two cleaning cycles."
          : `Choose a cycle from 1 to ${masses.length - 1}, so at least two cycles lie on the base-metal line.`;
  }
  if (Object.keys(errors).length) return { ok: false, errors };

  try {
    const areaCm2 = couponArea(input.geometry);
    const exposureHours = (removed - installed) / 3_600_000;
    const rawG = input.initialMassG - (final as number);

    let method: MassLossMethod = "final-mass";
    let blankLossG: number | null = null;
    let slopeGPerCycle: number | null = null;
    let correctedG: number;
    if (masses.length >= 2 && cycleFrom) {
      method = "cleaning-curve";
      const cumulative = masses.map((m) => Math.max(0, input.initialMassG - m));
      const fit = cleaningCurveCorrection(cumulative, cycleFrom);
      slopeGPerCycle = fit.slopeGPerCycle;
      correctedG = fit.correctedLossG;
      if (hasBlank) blankLossG = (input.blankInitialMassG as number) - blanks[blanks.length - 1];
    } else if (hasBlank) {
      method = "blank-corrected";
      blankLossG = (input.blankInitialMassG as number) - blanks[blanks.length - 1];
      if (blankLossG < 0) {
        return { ok: false, errors: { blankMassesG: "The blank gained mass during cleaning; check the weighings." } };
      }
      correctedG = rawG > 0 ? blankCorrectedMassLoss(rawG, Math.min(blankLossG, rawG)) : rawG;
      if (rawG > 0 && blankLossG > rawG) correctedG = 0;
    } else {
      correctedG = rawG;
    }
    const lossForRate = Math.max(0, correctedG);
    const rate = weightLossRate({ massLossG: lossForRate, areaCm2, exposureHours, densityGcm3: input.densityGcm3 });

    let pitting: CouponResult["pitting"] = null;
    if (isNum(deepest)) {
      const pr = pittingRate({ maxPitDepthMm: deepest, exposureHours });
      const factor =
        lossForRate > 0 && deepest > 0
          ? pittingFactor({ maxPitDepthMm: deepest, massLossG: lossForRate, areaCm2, densityGcm3: input.densityGcm3 })
          : null;
      pitting = { maxPitDepthMm: deepest, mmPerYear: pr.mmPerYear, mpy: pr.mpy, factor };
    }

    const general = severity("general", rate.mmPerYear, input.generalThresholds);
    const pittingSeverity = pitting ? severity("pitting", pitting.mmPerYear, input.pittingThresholds) : null;
    const worst = pittingSeverity ? worseSeverity(general, pittingSeverity) : general;
    const worstKind =
      pittingSeverity && worst === pittingSeverity && pittingSeverity !== general ? "pitting" : "general";

    const flags = couponQualityFlags({
      // the corrosion loss the rate uses (a gain stays negative so it is flagged as such)
      massLossG: rawG < 0 ? rawG : lossForRate,
      exposureHours,
      minimumExposureHours: input.minimumExposureDays ? input.minimumExposureDays * 24 : undefined,
      balanceResolutionG: input.balanceResolutionG,
      blankLossG: blankLossG ?? undefined,
      pittingObserved: input.pittingVisible ?? undefined,
      maxPitDepthMm: deepest,
      areaCm2,
      densityGcm3: input.densityGcm3,
    });
    const jump = input.historyMmPerYear ? historyJumpFlag(rate.mmPerYear, input.historyMmPerYear) : null;
    if (jump) flags.unshift(jump);

    return {
      ok: true,
      result: {
        version: COUPON_RESULT_VERSION,
        areaCm2,
        exposureHours,
        exposureDays: exposureHours / 24,
        massLoss: { method, rawG, blankLossG, slopeGPerCycle, correctedG: lossForRate },
        rate,
        pitting,
        severity: { general, pitting: pittingSeverity, worst, worstKind },
        flags,
        basis: {
          ...calculationBasis({ densityGcm3: input.densityGcm3, source: input.densitySource }),
          thresholds: {
            general: input.generalThresholds ?? "NACE SP0775",
            pitting: input.pittingThresholds ?? "NACE SP0775",
          },
        },
      },
    };
  } catch (error) {
    if (error instanceof RangeError) return { ok: false, errors: { [fieldOf(error.message)]: error.message } };
    throw error;
  }
}
