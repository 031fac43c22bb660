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
import { findMaterial } from "./materials.ts";
import { couponQualityFlags, historyJumpFlag, type CouponFlagCode, type QualityFlag } from "./quality.ts";
import {
  gradeForMaterial,
  worseSeverity,
  type FamilyThresholds,
  type MaterialFamily,
  type Severity,
  type SeverityThresholds,
} from "./severity.ts";
import { FieldRangeError } from "./validate.ts";

const COUPON_RESULT_VERSION = "coupon-result 2.1.0";

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
  /** Key of the coupon's material in MATERIALS (the coupon's material code); sets the family it is graded as. */
  materialKey?: string | null;
  /** The owner's carbon-steel thresholds, mm/y (without them: the NACE SP0775 bands). */
  generalThresholds?: SeverityThresholds;
  pittingThresholds?: SeverityThresholds;
  /** The owner's thresholds for other material families; a family without them is not graded. */
  familyThresholds?: FamilyThresholds;
  minimumExposureDays?: number;
  /** General rates of the point's earlier approved results, mm/y, for the history check. */
  historyMmPerYear?: number[];
  /** Pitting rates of the point's earlier approved results that measured pits, mm/y. */
  pittingHistoryMmPerYear?: number[];
};

export type MassLossMethod = "final-mass" | "blank-corrected" | "cleaning-curve";

/**
 * The full assessment of one coupon pull. `determinable: false` (a mass gain, or a blank
 * that lost more than the coupon) has `rate: null`, `massLoss.correctedG: null`, no
 * severity and a warning flag saying what to do; a material with no thresholds has a
 * rate but `severity.general: null` with the reason in `severity.generalBasis`.
 */
export type CouponAssessment = {
  version: string;
  areaCm2: number;
  exposureHours: number;
  exposureDays: number;
  /** False when the mass loss gives no rate (a mass gain, or a blank that lost more than the coupon). */
  determinable: boolean;
  /** Why no rate can be determined and what to do; null when determinable. */
  notDeterminableReason: string | null;
  massLoss: {
    method: MassLossMethod;
    /** initial − final (negative: the coupon gained mass). */
    rawG: number;
    blankLossG: number | null;
    slopeGPerCycle: number | null;
    /** The loss the rate is computed from (never negative); null when not determinable. */
    correctedG: number | null;
  };
  /** null when not determinable. */
  rate: WeightLossRate | null;
  pitting: { maxPitDepthMm: number; mmPerYear: number; mpy: number; factor: number | null } | null;
  severity: {
    /** null: not graded (not determinable, or no thresholds for this material). */
    general: Severity | null;
    pitting: Severity | null;
    worst: Severity | null;
    worstKind: "general" | "pitting" | null;
    /** What each grade was graded against, e.g. "NACE SP0775 bands, carbon steel" or "not graded: …". */
    generalBasis: string;
    pittingBasis: string | null;
  };
  flags: QualityFlag<CouponFlagCode>[];
  basis: CalculationBasis & {
    materialFamily: MaterialFamily;
    thresholds: { general: SeverityThresholds | string; pitting: SeverityThresholds | string };
  };
};

export type CouponAssessmentOutcome =
  { ok: true; result: CouponAssessment } | { ok: false; errors: Record<string, string> };

/**
 * A determinable, graded assessment: the shape the screens and the stored results use
 * today (rate and severities never null).
 */
export type CouponResult = Omit<
  CouponAssessment,
  "determinable" | "notDeterminableReason" | "massLoss" | "rate" | "severity"
> & {
  determinable: true;
  notDeterminableReason: null;
  massLoss: Omit<CouponAssessment["massLoss"], "correctedG"> & { correctedG: number };
  rate: WeightLossRate;
  severity: Omit<CouponAssessment["severity"], "general" | "worst" | "worstKind"> & {
    general: Severity;
    worst: Severity;
    worstKind: "general" | "pitting";
  };
};

/**
 * `ok: false` also when the inputs are valid but give no graded result; `assessment`
 * then carries the full assessment (rate null or severity null) with its reason.
 */
export type CouponResultOutcome =
  { ok: true; result: CouponResult } | { ok: false; errors: Record<string, string>; assessment?: CouponAssessment };

const isNum = (v: unknown): v is number => typeof v === "number" && Number.isFinite(v);

/** The form field each library input belongs to; the library names the input exactly (FieldRangeError.field). */
const FIELD_OF_INPUT: Readonly<Record<string, string>> = {
  geometry: "geometry",
  shape: "geometry",
  lengthMm: "geometry",
  widthMm: "geometry",
  thicknessMm: "geometry",
  diameterMm: "geometry",
  holeDiameterMm: "geometry",
  exposedEnds: "geometry",
  areaCm2: "geometry",
  densityGcm3: "density",
  source: "density",
  exposureHours: "removedAt",
  cumulativeLossG: "couponMassesG",
  baseMetalFromCycle: "baseMetalFromCycle",
  blankLossG: "blankMassesG",
  couponLossG: "couponMassesG",
  maxPitDepthMm: "pitDepthsMm",
  massLossG: "couponMassesG",
  balanceResolutionG: "balanceResolutionG",
  keyOrUns: "materialKey",
};

function fieldOf(error: RangeError): string {
  if (!(error instanceof FieldRangeError)) return "form";
  // "cumulativeLossG[2]" and "thresholds.high" belong to the field of their first name.
  const exact = FIELD_OF_INPUT[error.field];
  if (exact) return exact;
  const base = /^[^.[]+/.exec(error.field)?.[0] ?? "";
  return FIELD_OF_INPUT[base] ?? "form";
}

/**
 * One coupon pull as a graded result, for the screens and stored results that need a
 * rate and a severity. A valid pull that gives none is `ok: false` with the reason as a
 * field error (never a rate of 0 graded "low") and the full `assessment` beside it;
 * use assessCoupon to get such assessments as results.
 */
export function evaluateCouponResult(input: CouponResultInput): CouponResultOutcome {
  const outcome = assessCoupon(input);
  if (!outcome.ok) return outcome;
  const a = outcome.result;
  if (!a.determinable || a.rate === null || a.massLoss.correctedG === null) {
    const field = a.massLoss.method === "blank-corrected" && a.massLoss.rawG >= 0 ? "blankMassesG" : "couponMassesG";
    return {
      ok: false,
      errors: { [field]: a.notDeterminableReason ?? "No corrosion rate can be determined." },
      assessment: a,
    };
  }
  const { general, worst, worstKind } = a.severity;
  if (general === null || worst === null || worstKind === null) {
    return { ok: false, errors: { form: `The rate is ${a.severity.generalBasis}.` }, assessment: a };
  }
  return {
    ok: true,
    result: {
      ...a,
      determinable: true,
      notDeterminableReason: null,
      massLoss: { ...a.massLoss, correctedG: a.massLoss.correctedG },
      rate: a.rate,
      severity: { ...a.severity, general, worst, worstKind },
    },
  };
}

/**
 * One coupon pull, assessed end to end (see CouponAssessment). Problems with the
 * inputs come back as field errors keyed by the form's field names, in words.
 */
export function assessCoupon(input: CouponResultInput): CouponAssessmentOutcome {
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
  // a loop, not Math.max(...pits): spreading a long list overflows the call stack
  const deepest = pits.length ? pits.reduce((a, b) => (b > a ? b : a), pits[0]) : undefined;
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
    // Without a material (inputs stored before it was recorded) the coupon is taken as carbon
    // steel, as it always was, and the basis line says so.
    const materialGiven = input.materialKey !== null && input.materialKey !== undefined;
    const family: MaterialFamily = materialGiven ? findMaterial(input.materialKey as string).family : "carbon-steel";
    const assumed = materialGiven ? "" : " (coupon material not given: assumed carbon steel)";

    let method: MassLossMethod = "final-mass";
    let blankLossG: number | null = null;
    let slopeGPerCycle: number | null = null;
    let correctedG: number | null;
    let notDeterminableReason: string | null = null;
    // Problems found while computing are gathered too, so one does not hide another.
    const computeErrors: Record<string, string> = {};
    if (hasBlank) {
      blankLossG = (input.blankInitialMassG as number) - blanks[blanks.length - 1];
      if (blankLossG < 0) computeErrors.blankMassesG = "The blank gained mass during cleaning; check the weighings.";
    }
    if (rawG < 0) {
      notDeterminableReason = `The coupon gained ${-rawG} g: no corrosion rate can be determined. Re-clean the coupon, check the blank and check the weighings.`;
    } else if (blankLossG !== null && blankLossG > rawG && !(masses.length >= 2 && cycleFrom)) {
      notDeterminableReason = `The blank lost more (${blankLossG} g) than the coupon (${rawG} g): no corrosion rate can be determined. Check the blank, re-clean if needed and check the weighings.`;
    }
    if (masses.length >= 2 && cycleFrom) {
      method = "cleaning-curve";
      const cumulative = masses.map((m) => Math.max(0, input.initialMassG - m));
      try {
        const fit = cleaningCurveCorrection(cumulative, cycleFrom);
        slopeGPerCycle = fit.slopeGPerCycle;
        correctedG = fit.correctedLossG;
      } catch (error) {
        if (!(error instanceof RangeError)) throw error;
        computeErrors[fieldOf(error)] ??= error.message;
        correctedG = null;
      }
    } else if (hasBlank) {
      method = "blank-corrected";
      correctedG =
        notDeterminableReason || computeErrors.blankMassesG ? null : blankCorrectedMassLoss(rawG, blankLossG as number);
    } else {
      correctedG = rawG;
    }
    if (Object.keys(computeErrors).length) return { ok: false, errors: computeErrors };
    if (notDeterminableReason) correctedG = null;
    const determinable = correctedG !== null;
    const rate =
      correctedG === null
        ? null
        : weightLossRate({ massLossG: correctedG, areaCm2, exposureHours, densityGcm3: input.densityGcm3 });

    let pitting: CouponAssessment["pitting"] = null;
    if (isNum(deepest)) {
      const pr = pittingRate({ maxPitDepthMm: deepest, exposureHours });
      const factor =
        correctedG !== null && correctedG > 0 && deepest > 0
          ? pittingFactor({ maxPitDepthMm: deepest, massLossG: correctedG, areaCm2, densityGcm3: input.densityGcm3 })
          : null;
      pitting = { maxPitDepthMm: deepest, mmPerYear: pr.mmPerYear, mpy: pr.mpy, factor };
    }

    const thresholds = { byFamily: input.familyThresholds };
    const withAssumption = (grade: { severity: Severity | null; basis: string }) => ({
      ...grade,
      basis: grade.basis + assumed,
    });
    const general = rate
      ? withAssumption(
          gradeForMaterial("general", rate.mmPerYear, family, { ...thresholds, carbonSteel: input.generalThresholds }),
        )
      : { severity: null, basis: "not graded: no corrosion rate could be determined" };
    const pittingGrade = pitting
      ? rate
        ? withAssumption(
            gradeForMaterial("pitting", pitting.mmPerYear, family, {
              ...thresholds,
              carbonSteel: input.pittingThresholds,
            }),
          )
        : { severity: null, basis: "not graded: the coupon's mass loss gives no rate" }
      : null;
    const g = general.severity;
    const p = pittingGrade?.severity ?? null;
    const worst = g && p ? worseSeverity(g, p) : (g ?? p);
    const worstKind = worst === null ? null : p && worst === p && p !== g ? "pitting" : g ? "general" : "pitting";

    const flags = couponQualityFlags({
      massLossG: correctedG ?? rawG,
      rawMassLossG: rawG,
      exposureHours,
      minimumExposureHours: input.minimumExposureDays ? input.minimumExposureDays * 24 : undefined,
      balanceResolutionG: input.balanceResolutionG,
      blankLossG: blankLossG ?? undefined,
      cleaningCycles: masses.length,
      cleaningCorrected: method !== "final-mass",
      rateMpy: rate?.mpy,
      pittingObserved: input.pittingVisible ?? undefined,
      maxPitDepthMm: deepest,
      areaCm2,
      densityGcm3: input.densityGcm3,
    });
    const jump = rate && input.historyMmPerYear ? historyJumpFlag(rate.mmPerYear, input.historyMmPerYear) : null;
    const pittingJump =
      pitting && input.pittingHistoryMmPerYear
        ? historyJumpFlag(pitting.mmPerYear, input.pittingHistoryMmPerYear, undefined, "pitting")
        : null;
    if (pittingJump) flags.unshift(pittingJump);
    if (jump) flags.unshift(jump);

    const thresholdRecord = (own: SeverityThresholds | undefined, kind: "general" | "pitting") =>
      family === "carbon-steel"
        ? (own ?? "NACE SP0775 bands, carbon steel")
        : (input.familyThresholds?.[family]?.[kind] ?? "none");

    return {
      ok: true,
      result: {
        version: COUPON_RESULT_VERSION,
        areaCm2,
        exposureHours,
        exposureDays: exposureHours / 24,
        determinable,
        notDeterminableReason,
        massLoss: { method, rawG, blankLossG, slopeGPerCycle, correctedG },
        rate,
        pitting,
        severity: {
          general: g,
          pitting: p,
          worst,
          worstKind,
          generalBasis: general.basis,
          pittingBasis: pittingGrade?.basis ?? null,
        },
        flags,
        basis: {
          ...calculationBasis({ densityGcm3: input.densityGcm3, source: input.densitySource }),
          materialFamily: family,
          thresholds: {
            general: thresholdRecord(input.generalThresholds, "general"),
            pitting: thresholdRecord(input.pittingThresholds, "pitting"),
          },
        },
      },
    };
  } catch (error) {
    if (error instanceof RangeError) return { ok: false, errors: { [fieldOf(error)]: error.message } };
    throw error;
  }
}
