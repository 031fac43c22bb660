/**
 * Wallcast calculation library — the public surface.
 *
 * Pure TypeScript, no I/O: the server (source of truth) and the browser
 * (live previews in forms) import the same functions. Standards by module:
 * - units.ts           SI, international inch and pound; ASTM G1 K constants; exact mm/y → mpy
 * - dates.ts           ISO 8601 calendar dates as whole-day numbers
 * - coupon.ts          ASTM G1 §7–8, G31, NACE SP0775: area, weight-loss rate, blank and cleaning-cycle corrections
 * - pitting.ts         ASTM G46: pitting rate and pitting factor
 * - severity.ts        NACE SP0775 severity categories, owner thresholds
 * - electrochemistry.ts ASTM G59, G102: equivalent weight, Stern–Geary, Faraday rates
 * - piping.ts          ASME B31.3 §304.1.2, API 574, API 570: required thickness, rates, remaining life, next inspection
 * - pipe-sizes.ts      ASME B36.10M / B36.19M: outside diameter by NPS, nominal wall by NPS and schedule
 * - regression.ts      least-squares CML rate with a Student-t interval, conservative remaining life
 * - anodes.ts          sacrificial anode life (DNV-RP-B401 style)
 * - materials.ts       ASTM G1 appendix densities, nominal compositions, UNS numbers
 * - quality.ts         quality flags for coupon results and thickness data
 * - life.ts            API 570 remaining life per CML and circuit, next inspection, status at read time
 * - basis.ts           the calculation basis record stored with every result
 * - validate.ts        the shared checks; every error is a FieldRangeError naming its input
 */

export {
  MM_PER_MIL,
  MPA_PER_PSI,
  HOURS_PER_YEAR,
  FARADAY_C_PER_MOL,
  K_CONSTANTS,
  RATE_UNITS,
  UNIT_LABELS,
  mmPerYearToMpy,
  mpyToMmPerYear,
  convertRate,
  mmToInch,
  inchToMm,
  mpaToPsi,
  psiToMpa,
  unitLabel,
  toDisplay,
  fromDisplay,
  displayValue,
} from "./units.ts";
export type { RateUnit, UnitSystem, DisplayQuantity } from "./units.ts";

export { parseIsoDay, formatIsoDay, isIsoDay, daysBetween, addDays } from "./dates.ts";

export {
  COUPON_SHAPES,
  couponArea,
  weightLossRate,
  massLoss,
  blankCorrectedMassLoss,
  cleaningCurveCorrection,
} from "./coupon.ts";
export type { CouponGeometry, WeightLossInput, WeightLossRate, CleaningCurveResult } from "./coupon.ts";

export { pittingRate, pittingFactor, averagePenetrationMm } from "./pitting.ts";
export type { PittingRateInput, PittingFactorInput } from "./pitting.ts";

export {
  SEVERITY_LEVELS,
  MATERIAL_FAMILIES,
  SP0775_BANDS_MPY,
  SP0775_BANDS_MM_PER_YEAR,
  SP0775_BASIS,
  severity,
  severityBand,
  gradeForMaterial,
  worseSeverity,
  validateThresholds,
} from "./severity.ts";
export type {
  Severity,
  RateKind,
  SeverityThresholds,
  MaterialFamily,
  FamilyThresholds,
  MaterialGrade,
  SeverityBand,
} from "./severity.ts";

export {
  ATOMIC_WEIGHTS,
  DEFAULT_VALENCES,
  DEFAULT_VALENCE_SOURCES,
  K1_MM_G_PER_UA_CM_Y,
  K2_G_CM2_PER_UA_M2_D,
  equivalentWeight,
  sternGearyB,
  corrosionCurrentDensity,
  faradayRate,
} from "./electrochemistry.ts";

export {
  pressureDesignThickness,
  Y_MATERIAL_GROUPS,
  yCoefficient,
  Y_COEFFICIENT_TABLE,
  STANDARD_NPS,
  structuralMinimumThickness,
  circuitRequiredThickness,
  thicknessRates,
  remainingLife,
  PIPING_CLASSES,
  CLASS_MAXIMUM_INTERVAL_YEARS,
  nextInspection,
} from "./piping.ts";
export type {
  PressureDesignInput,
  YMaterialGroup,
  CircuitRequiredThicknessInput,
  CircuitRequiredThickness,
  ThicknessReading,
  ThicknessRates,
  PipingClass,
  NextInspectionInput,
  NextInspection,
} from "./piping.ts";

export {
  PIPE_SIZE_SOURCE,
  PIPE_SIZE_SOURCE_TAG,
  PIPE_SCHEDULES,
  NUMBERED_SCHEDULES,
  STAINLESS_SCHEDULES,
  WEIGHT_CLASSES,
  PIPE_SIZE_NPS,
  normaliseSchedule,
  outsideDiameterOf,
  nominalWallOf,
  schedulesOf,
} from "./pipe-sizes.ts";
export type { PipeSchedule } from "./pipe-sizes.ts";

export { studentTQuantile, regressionRate, conservativeRemainingLife } from "./regression.ts";
export type { RegressionRate } from "./regression.ts";

export { sacrificialAnodeLife, TYPICAL_ANODE_CAPACITY_AH_PER_KG, TYPICAL_UTILIZATION_FACTOR } from "./anodes.ts";
export type { AnodeLifeInput } from "./anodes.ts";

export { MATERIALS, DENSITY_SOURCE_LABEL, findMaterial, materialEquivalentWeight } from "./materials.ts";
export type { MaterialRecord, SourceTag } from "./materials.ts";

export {
  QUALITY_DEFAULTS,
  DEFAULT_MINIMUM_EXPOSURE_DAYS,
  couponQualityFlags,
  thicknessQualityFlags,
  surveyReadingFlags,
  historyJumpFlag,
} from "./quality.ts";
export type {
  FlagSeverity,
  CouponFlagCode,
  ThicknessFlagCode,
  QualityFlag,
  CouponQualityInput,
  ThicknessQualityOptions,
  SurveyReadingInput,
} from "./quality.ts";

export {
  RATE_POLICIES,
  BELOW_REQUIRED_WORDS,
  DUE_SOON_DAYS,
  LIFE_STATUS_WORDS,
  assessCmlLife,
  assessCircuitLife,
  circuitCouponRates,
  lifeNextInspection,
  lifeStatus,
} from "./life.ts";
export type {
  RatePolicy,
  RatePolicyName,
  LifeCondition,
  LifeStatus,
  LifeFlagCode,
  GoverningRateName,
  NextInspectionGovernedBy,
  NextInspectionResult,
  CmlLife,
  CmlLifeInput,
  CircuitLife,
  CircuitLifeInput,
  CouponRateInput,
  CouponRatesSummary,
} from "./life.ts";

export { FORMULA_VERSION, calculationBasis } from "./basis.ts";
export { FieldRangeError } from "./validate.ts";
export type { CalculationBasis } from "./basis.ts";

export { evaluateCouponResult, assessCoupon } from "./coupon-result.ts";
export type {
  CouponAssessment,
  CouponAssessmentOutcome,
  CouponResult,
  CouponResultInput,
  CouponResultOutcome,
  MassLossMethod,
} from "./coupon-result.ts";
