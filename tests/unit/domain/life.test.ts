import { describe, expect, it } from "vitest";
import {
  BELOW_REQUIRED_WORDS,
  FORMULA_VERSION,
  LIFE_STATUS_WORDS,
  assessCircuitLife,
  assessCmlLife,
  circuitRequiredThickness,
  lifeStatus,
  nextInspection,
} from "../../../app/domain/index.ts";
import type { CircuitLifeInput, CmlLifeInput } from "../../../app/domain/index.ts";

/*
 * Worked example, NPS 6 carbon-steel line:
 * - D = 168.3 mm, nominal wall 7.11 mm (NPS 6 Sch 40, ASME B36.10M [pub]);
 * - S = 137.9 MPa (20 ksi, A106 Gr B below 205 °C [mem]), E = 1 (seamless), W = 1, Y = 0.4
 *   (B31.3 Table 304.1.1, ferritic steel ≤ 482 °C [pub]); P = 5 MPa (example value);
 * - B31.3 eq. (3a): t = P·D / (2(S·E·W + P·Y)) = 5 × 168.3 / (2 × (137.9 + 2)) = 841.5 / 279.8 mm [pub formula].
 */
const P = 5;
const D = 168.3;
const S = 137.9;
const tPressure = (P * D) / (2 * (S * 1 * 1 + P * 0.4));
const required = circuitRequiredThickness({
  pressureMPa: P,
  outsideDiameterMm: D,
  allowableStressMPa: S,
  jointEfficiency: 1,
  weldStrengthFactor: 1,
  yCoefficient: 0.4,
  nps: 6,
});

const cml = (over: Partial<CmlLifeInput> = {}): CmlLifeInput => ({
  readings: [
    { date: "2021-03-01", thicknessMm: 6.5 },
    { date: "2026-03-01", thicknessMm: 6.0 },
  ],
  baseline: { thicknessMm: 7.0, date: "2016-03-01" },
  nominalWallMm: 7.11,
  millTolerancePct: 12.5,
  requiredMm: required.requiredMm,
  policy: { policy: "greater_of_long_short" },
  pipingClass: 2,
  injectionPoint: false,
  today: "2026-06-01",
  ...over,
});

describe("assessCmlLife — API 570 worked example", () => {
  it("required thickness is the B31.3 eq. 3a value, above the API 574 NPS 6 minimum 2.79 mm [mem]", () => {
    expect(required.requiredMm).toBeCloseTo(841.5 / 279.8, 12); // = 3.00750… mm, eq. (3a) [pub]
    expect(required.governedBy).toBe("pressure-design");
  });

  it("long-term, short-term rates, remaining life and interval (API 570 §7.1 [pub])", () => {
    const life = assessCmlLife(cml());
    // 2016-03-01 → 2026-03-01 is 3652 days (leap days 2020-02-29, 2024-02-29) [der]
    const longYears = 3652 / 365.25;
    // 2021-03-01 → 2026-03-01 is 1826 days (leap day 2024-02-29) [der]
    const shortYears = 1826 / 365.25;
    expect(life.condition).toBe("assessed");
    expect(life.longTermMmPerYear).toBeCloseTo((7.0 - 6.0) / longYears, 12); // (t_initial − t_actual)/years [pub]
    expect(life.shortTermMmPerYear).toBeCloseTo((6.5 - 6.0) / shortYears, 12); // (t_previous − t_actual)/years [pub]
    const rate = Math.max(1 / longYears, 0.5 / shortYears); // greater of the two, the common default [mem]
    expect(life.governingRateMmPerYear).toBeCloseTo(rate, 12);
    // 1/3652 = 0.5/1826 exactly: the two rates tie, and a tie is named long-term
    expect(life.governingRate).toBe("long-term");
    // remaining life = (t_actual − t_required) / rate [pub] ≈ 29.92 y
    expect(life.remainingLifeConservativeYears).toBeCloseTo((6.0 - tPressure) / rate, 9);
    expect(life.remainingLifeYears).toBeCloseTo((6.0 - tPressure) / rate, 9);
    expect(life.lifeNote).toMatch(/no regression/);
    // interval = min(½ RL ≈ 14.96 y, class 2 maximum 10 y [pub]) = 10 y, calendar years
    expect(life.nextInspection).toEqual({
      dueOn: "2036-03-01",
      intervalYears: 10,
      governedBy: "class-maximum",
      note: null,
    });
    expect(life.asOf).toBe("2026-03-01");
    expect(life.basis.formulaVersion).toBe(FORMULA_VERSION);
  });

  it("half-life governs when shorter than the class maximum (API 570 [pub])", () => {
    const life = assessCmlLife(
      cml({
        readings: [
          { date: "2021-03-01", thicknessMm: 6.5 },
          { date: "2026-03-01", thicknessMm: 3.5 },
        ],
      }),
    );
    const rate = 3 / (1826 / 365.25); // short-term (6.5 − 3.5)/years [pub]
    const rl = (3.5 - tPressure) / rate; // ≈ 0.83 y
    expect(life.remainingLifeConservativeYears).toBeCloseTo(rl, 9);
    expect(life.nextInspection.governedBy).toBe("half-life");
    expect(life.nextInspection.intervalYears).toBeCloseTo(rl / 2, 9);
    expect(life.projectedRequiredOn).toBe(addDaysIso("2026-03-01", Math.floor(rl * 365.25)));
  });

  it("whole-year intervals are calendar years: 2026-03-01 + 10 y = 2036-03-01 (calendar, derived)", () => {
    expect(nextInspection({ remainingLifeYears: 40, pipingClass: 2, inspectedOn: "2026-03-01" }).dueOn).toBe(
      "2036-03-01",
    );
  });

  it("injection points are capped at 3 years [mem]", () => {
    const life = assessCmlLife(cml({ injectionPoint: true }));
    expect(life.nextInspection).toMatchObject({ dueOn: "2029-03-01", intervalYears: 3, governedBy: "injection-point" });
  });

  it("the owner's maximum only tightens the interval and says so", () => {
    const life = assessCmlLife(cml({ maxIntervalYears: 6 }));
    expect(life.nextInspection).toMatchObject({ dueOn: "2032-03-01", governedBy: "owner-maximum" });
    expect(assessCmlLife(cml({ maxIntervalYears: 15 })).nextInspection.governedBy).toBe("class-maximum");
  });

  it("a dated base-line without a thickness is the nominal wall × (1 − mill tolerance) at that date", () => {
    const life = assessCmlLife(cml({ baseline: { thicknessMm: null, date: "2016-03-01" } }));
    expect(life.baseline).toEqual({
      thicknessMm: 7.11 * 0.875,
      date: "2016-03-01",
      source: "nominal-less-mill-tolerance",
    });
    // long-term from 6.22125 mm on 2016-03-01 to 6.0 mm on 2026-03-01, 3652 days [API 570 §7.1, derived]
    expect(life.longTermMmPerYear).toBeCloseTo((7.11 * 0.875 - 6.0) / (3652 / 365.25), 12);
  });

  it("an undated base-line is not used: the long-term rate starts at the first reading, with a note", () => {
    const life = assessCmlLife(
      cml({
        readings: [
          { date: "2021-03-01", thicknessMm: 7.0 },
          { date: "2026-03-01", thicknessMm: 6.5 },
        ],
        baseline: { thicknessMm: null, date: null },
      }),
    );
    expect(life.baseline).toBeNull();
    // (7.0 − 6.5) mm over 1826 days [API 570 §7.1, derived]; the nominal less tolerance (6.22 mm) is not a start
    expect(life.longTermMmPerYear).toBeCloseTo(0.5 / (1826 / 365.25), 12);
    expect(life.flags.map((f) => f.code).sort()).toEqual(["baseline-undated", "few-readings"]);
    expect(life.flags.map((f) => f.code)).not.toContain("thickness-growth");
  });
});

describe("assessCmlLife — regression (hand-worked, OLS formulas NIST/SEMATECH §4.1.4.1)", () => {
  it("regression_upper governs with three readings; t(0.975, 1) = 12.706 (NIST t table §1.3.6.7.2 [pub])", () => {
    const readings = [
      { date: "2020-03-01", thicknessMm: 7.0 },
      { date: "2022-03-01", thicknessMm: 6.8 },
      { date: "2024-03-01", thicknessMm: 6.5 },
    ];
    const life = assessCmlLife(
      cml({ readings, baseline: { thicknessMm: null, date: null }, policy: { policy: "regression_upper" } }),
    );
    // x in 365.25-day years from the first date: 0, 730/365.25, 1461/365.25 [der]
    const x = [0, 730 / 365.25, 1461 / 365.25];
    const y = [7.0, 6.8, 6.5];
    const mx = (x[0] + x[1] + x[2]) / 3;
    const my = (y[0] + y[1] + y[2]) / 3;
    const sxx = x.reduce((s, v) => s + (v - mx) ** 2, 0);
    const sxy = x.reduce((s, v, i) => s + (v - mx) * (y[i] - my), 0);
    const b = sxy / sxx; // slope b1 = Sxy/Sxx
    const a = my - b * mx;
    const sse = y.reduce((s, v, i) => s + (v - (a + b * x[i])) ** 2, 0);
    const se = Math.sqrt(sse / 1 / sxx); // s_b1 = sqrt(SSE/(n−2)/Sxx)
    const upper = -b + 12.706 * se;
    expect(life.regression?.mmPerYear).toBeCloseTo(-b, 10);
    expect(life.regression?.upperMmPerYear).toBeCloseTo(upper, 3); // 12.706 is the table's rounding
    expect(life.governingRate).toBe("regression-upper");
    expect(life.remainingLifeConservativeYears).toBeCloseTo((6.5 - tPressure) / life.governingRateMmPerYear!, 9);
    expect(life.remainingLifeYears).toBeCloseTo((6.5 - tPressure) / -b, 8); // best estimate
    expect(life.remainingLifeYears!).toBeGreaterThan(life.remainingLifeConservativeYears!);
  });

  it("under the default policy the API 570 rate gives the point estimate; the regression's upper bound only shortens the conservative figure", () => {
    const readings = [
      { date: "2020-03-01", thicknessMm: 7.0 },
      { date: "2022-03-01", thicknessMm: 6.8 },
      { date: "2024-03-01", thicknessMm: 6.5 },
    ];
    const life = assessCmlLife(cml({ readings, baseline: { thicknessMm: null, date: null } }));
    // long-term (7.0 − 6.5)/(1461/365.25) and short-term (6.8 − 6.5)/(731/365.25) [pub, API 570 §7.1]
    const longTerm = 0.5 / (1461 / 365.25);
    const shortTerm = 0.3 / (731 / 365.25);
    expect(life.governingRate).toBe("short-term");
    expect(life.governingRateMmPerYear).toBeCloseTo(Math.max(longTerm, shortTerm), 12);
    expect(life.remainingLifeYears).toBeCloseTo((6.5 - tPressure) / shortTerm, 9);
    // the upper bound (12.706 × s_b1 above the fitted rate, see above) is faster: it gives the conservative figure
    const upperLife = (6.5 - tPressure) / life.regression!.upperMmPerYear;
    expect(upperLife).toBeLessThan(life.remainingLifeYears!);
    expect(life.remainingLifeConservativeYears).toBeCloseTo(upperLife, 9);
  });
});

describe("assessCmlLife — growth, no loss, below required", () => {
  const growing = [
    { date: "2021-03-01", thicknessMm: 6.5 },
    { date: "2026-03-01", thicknessMm: 6.6 },
  ];

  it("a wall that grew gives rate 0, never negative, and a flag [cp]", () => {
    const life = assessCmlLife(
      cml({ readings: growing, baseline: { thicknessMm: null, date: null }, nominalWallMm: null }),
    );
    expect(life.shortTermMmPerYear).toBe(0);
    expect(life.longTermMmPerYear).toBe(0);
    expect(life.governingRateMmPerYear).toBe(0);
    expect(life.flags.map((f) => f.code)).toContain("thickness-growth");
  });

  it("no loss without a stated minimum: no remaining life, with a reason; class maximum for the date", () => {
    const life = assessCmlLife(
      cml({ readings: growing, baseline: { thicknessMm: null, date: null }, nominalWallMm: null }),
    );
    expect(life.condition).toBe("no_loss");
    expect(life.remainingLifeYears).toBeNull();
    expect(life.remainingLifeConservativeYears).toBeNull();
    expect(life.lifeNote).toMatch(/No measurable wall loss/);
    expect(life.nextInspection).toMatchObject({ dueOn: "2036-03-01", governedBy: "class-maximum" }); // class 2: 10 y [pub]
  });

  it("no loss, class 4, no owner maximum: no date, with the reason; with one: the owner's maximum", () => {
    const base = {
      readings: growing,
      baseline: { thicknessMm: null, date: null },
      nominalWallMm: null,
      pipingClass: 4 as const,
    };
    const none = assessCmlLife(cml(base));
    expect(none.nextInspection.dueOn).toBeNull();
    expect(none.nextInspection.note).toMatch(/owner's maximum interval/);
    const owner = assessCmlLife(cml({ ...base, maxIntervalYears: 8 }));
    expect(owner.nextInspection).toMatchObject({ dueOn: "2034-03-01", governedBy: "owner-maximum" });
  });

  it("with a stated minimum rate, growth takes the minimum and has a finite life", () => {
    const life = assessCmlLife(
      cml({
        readings: growing,
        baseline: { thicknessMm: null, date: null },
        nominalWallMm: null,
        policy: { policy: "greater_of_long_short", minimumRateMmPerYear: 0.05 },
      }),
    );
    expect(life.condition).toBe("assessed");
    expect(life.governingRate).toBe("stated-minimum");
    expect(life.governingRateMmPerYear).toBe(0.05);
    expect(life.remainingLifeConservativeYears).toBeCloseTo((6.6 - tPressure) / 0.05, 9); // API 570 RL [pub]
  });

  it("at or below required thickness: the condition and the words, never 0 years alone", () => {
    const life = assessCmlLife(
      cml({
        readings: [
          { date: "2021-03-01", thicknessMm: 4 },
          { date: "2026-03-01", thicknessMm: 2.9 },
        ],
      }),
    );
    expect(life.condition).toBe("below_required");
    expect(life.lifeNote).toContain(BELOW_REQUIRED_WORDS);
    expect(life.lifeNote).toMatch(/fitness-for-service assessment or repair needed/);
    expect(life.nextInspection.dueOn).toBeNull();
    // a single reading below required is still below required
    expect(
      assessCmlLife(
        cml({ readings: [{ date: "2026-03-01", thicknessMm: 3 }], baseline: { thicknessMm: null, date: null } }),
      ).condition,
    ).toBe("below_required");
  });

  it("no readings, or no required thickness, is no data with the reason", () => {
    expect(assessCmlLife(cml({ readings: [] }))).toMatchObject({
      condition: "no_data",
      lifeNote: "No approved thickness readings yet.",
    });
    const missing = assessCmlLife(
      cml({ requiredMm: null, requiredMissingReason: "design data missing: design pressure" }),
    );
    expect(missing).toMatchObject({ condition: "no_data", lifeNote: "design data missing: design pressure" });
  });

  it("refuses a reading after today, naming it", () => {
    expect(() => assessCmlLife(cml({ today: "2026-01-01" }))).toThrow(/readings\[1\]\.date/);
  });
});

describe("assessCircuitLife", () => {
  const circuit = (over: Partial<CircuitLifeInput> = {}): CircuitLifeInput => ({
    circuitMaterialCode: "carbon-steel",
    required: { requiredMm: required.requiredMm, governedBy: required.governedBy, reason: required.reason },
    nominalWallMm: 7.11,
    millTolerancePct: 12.5,
    pipingClass: 2,
    policy: { policy: "greater_of_long_short" },
    today: "2026-06-01",
    cmls: [
      { id: "a", injectionPoint: false, baseline: { thicknessMm: 7.0, date: "2016-03-01" }, readings: cml().readings },
      {
        id: "b",
        injectionPoint: false,
        baseline: { thicknessMm: 7.0, date: "2016-03-01" },
        readings: [
          { date: "2021-03-01", thicknessMm: 6.0 },
          { date: "2026-03-01", thicknessMm: 5.0 },
        ],
      },
    ],
    coupons: [],
    ...over,
  });

  it("the shortest remaining life governs; the next inspection is the earliest of the CMLs'", () => {
    const life = assessCircuitLife(circuit());
    expect(life.governingCmlId).toBe("b");
    // CML b: short-term (6.0 − 5.0)/(1826/365.25) governs; RL = (5.0 − t_required)/rate [pub]
    expect(life.remainingLifeConservativeYears).toBeCloseTo((5.0 - tPressure) / (1 / (1826 / 365.25)), 9);
    expect(life.nextInspection.dueOn).toBe(life.cmls.map((c) => c.nextInspection.dueOn!).sort()[0]);
    expect(life.rateSource).toBe("thickness");
  });

  it("below required governs before any shorter life", () => {
    const life = assessCircuitLife(
      circuit({
        cmls: [
          ...circuit().cmls,
          {
            id: "c",
            injectionPoint: false,
            baseline: { thicknessMm: null, date: null },
            readings: [{ date: "2026-03-01", thicknessMm: 2.5 }],
          },
        ],
      }),
    );
    expect(life.condition).toBe("below_required");
    expect(life.governingCmlId).toBe("c");
    // Assessment or repair is needed now: no later date of another CML stands for the circuit.
    expect(life.nextInspection.dueOn).toBeNull();
    expect(life.nextInspection.note).toBe(BELOW_REQUIRED_WORDS);
  });

  it("coupon rates: same material, determinable and inside the window only; the max of each kind", () => {
    const life = assessCircuitLife(
      circuit({
        coupons: [
          {
            id: "1",
            materialCode: "carbon-steel",
            removedOn: "2026-01-10",
            determinable: true,
            generalMmPerYear: 0.08,
            pittingMmPerYear: 0.3,
          },
          {
            id: "2",
            materialCode: "carbon-steel",
            removedOn: "2025-07-10",
            determinable: true,
            generalMmPerYear: 0.12,
            pittingMmPerYear: null,
          },
          {
            id: "3",
            materialCode: "stainless-316",
            removedOn: "2026-01-10",
            determinable: true,
            generalMmPerYear: 0.9,
            pittingMmPerYear: 0.9,
          },
          {
            id: "4",
            materialCode: "carbon-steel",
            removedOn: "2026-01-10",
            determinable: false,
            generalMmPerYear: null,
            pittingMmPerYear: null,
          },
          {
            id: "5",
            materialCode: "carbon-steel",
            removedOn: "2024-05-31",
            determinable: true,
            generalMmPerYear: 0.7,
            pittingMmPerYear: 0.7,
          },
        ],
      }),
    );
    expect(life.couponRates.since).toBe("2024-06-01"); // two calendar years before 2026-06-01
    expect(life.couponRates.maxGeneralMmPerYear).toBe(0.12);
    expect(life.couponRates.maxPittingMmPerYear).toBe(0.3);
    expect(life.couponRates.used.map((c) => c.id)).toEqual(["1", "2"]);
    expect(life.couponRates.leftOut).toEqual({ otherMaterial: 1, notDeterminable: 1, outsideWindow: 1 });
  });

  it("flags coupon and thickness rates more than the factor apart", () => {
    const coupon = (rate: number) => [
      {
        id: "1",
        materialCode: "carbon-steel",
        removedOn: "2026-01-10",
        determinable: true,
        generalMmPerYear: rate,
        pittingMmPerYear: null,
      },
    ];
    // governing thickness rate of CML b ≈ 0.2 mm/y
    expect(assessCircuitLife(circuit({ coupons: coupon(0.5) })).flags.map((f) => f.code)).toContain(
      "coupon-thickness-disagree",
    );
    expect(assessCircuitLife(circuit({ coupons: coupon(0.3) })).flags.map((f) => f.code)).not.toContain(
      "coupon-thickness-disagree",
    );
    expect(
      assessCircuitLife(circuit({ coupons: coupon(0.3), disagreementFactor: 1.2 })).flags.map((f) => f.code),
    ).toContain("coupon-thickness-disagree");
    // A stated minimum rate of 0.5 mm/y governs CML b but is a policy floor: the coupon's 0.5 mm/y
    // is still compared with the measured ≈ 0.2 mm/y, and disagrees.
    const floored = assessCircuitLife(
      circuit({ coupons: coupon(0.5), policy: { policy: "greater_of_long_short", minimumRateMmPerYear: 0.5 } }),
    );
    expect(floored.governingRateMmPerYear).toBe(0.5);
    expect(floored.flags.map((f) => f.code)).toContain("coupon-thickness-disagree");
  });

  it("without usable thickness history: a coupon-based estimate from the base-line wall, labelled", () => {
    const life = assessCircuitLife(
      circuit({
        cmls: [
          {
            id: "a",
            injectionPoint: false,
            baseline: { thicknessMm: null, date: "2016-06-01" },
            readings: [{ date: "2016-06-01", thicknessMm: 6.9 }],
          },
        ],
        coupons: [
          {
            id: "1",
            materialCode: "carbon-steel",
            removedOn: "2026-01-10",
            determinable: true,
            generalMmPerYear: 0.1,
            pittingMmPerYear: 0.25,
          },
        ],
      }),
    );
    expect(life.rateSource).toBe("coupon-general");
    expect(life.flags.map((f) => f.code)).toContain("coupon-based-estimate");
    expect(life.lifeNote).toMatch(/Coupon-based estimate/);
    // The base-line wall 7.11 × 0.875 mm from 2016-06-01, worn at 0.1 mm/y for the 3652 days to
    // today 2026-06-01 [derived]; RL = (estimate − t_required) / 0.1 (API 570 RL [pub])
    const estimate = 7.11 * 0.875 - 0.1 * (3652 / 365.25);
    expect(life.remainingLifeYears).toBeCloseTo((estimate - tPressure) / 0.1, 9);
    expect(life.asOf).toBe("2026-06-01");
    // Without a base-line date the time in service is unknown: no estimate, and it says why.
    const undated = assessCircuitLife(
      circuit({
        cmls: [
          {
            id: "a",
            injectionPoint: false,
            baseline: { thicknessMm: null, date: null },
            readings: [{ date: "2026-03-01", thicknessMm: 6.9 }],
          },
        ],
        coupons: circuit({ coupons: [] }).coupons.concat([
          {
            id: "1",
            materialCode: "carbon-steel",
            removedOn: "2026-01-10",
            determinable: true,
            generalMmPerYear: 0.1,
            pittingMmPerYear: null,
          },
        ]),
      }),
    );
    expect(undated.condition).toBe("no_data");
    expect(undated.lifeNote).toMatch(/no base-line date, so the time in service is unknown/);
    const pitting = assessCircuitLife({
      ...circuit(),
      cmls: [],
      coupons: circuit({ coupons: [] }).coupons,
      couponRateBasis: "pitting",
    });
    expect(pitting.condition).toBe("no_data");
  });

  it("without design data: no data, with the reason", () => {
    const life = assessCircuitLife(
      circuit({ required: null, requiredMissingReason: "design data missing: design pressure, outside diameter" }),
    );
    expect(life.condition).toBe("no_data");
    expect(life.lifeNote).toBe("design data missing: design pressure, outside diameter");
    expect(life.cmls.every((c) => c.condition === "no_data")).toBe(true);
  });
});

describe("lifeStatus", () => {
  it("judges the stored date against today, with one set of words", () => {
    const today = "2026-06-01";
    expect(lifeStatus({ condition: "below_required", nextInspectionOn: null }, today).code).toBe("below_required");
    expect(lifeStatus({ condition: "assessed", nextInspectionOn: "2026-05-31" }, today).code).toBe("overdue");
    expect(lifeStatus({ condition: "assessed", nextInspectionOn: "2026-08-30" }, today).code).toBe("due_soon"); // 90 days [cp]
    expect(lifeStatus({ condition: "assessed", nextInspectionOn: "2026-08-31" }, today).code).toBe("in_service");
    expect(lifeStatus({ condition: "no_data", nextInspectionOn: null }, today)).toEqual({
      code: "no_data",
      words: LIFE_STATUS_WORDS.no_data,
    });
    // A life without a date (no piping class, or class 4 without the owner's maximum) says what is missing.
    expect(lifeStatus({ condition: "assessed", nextInspectionOn: null }, today)).toEqual({
      code: "no_date",
      words: LIFE_STATUS_WORDS.no_date,
    });
    expect(lifeStatus({ condition: "no_loss", nextInspectionOn: null }, today).code).toBe("no_date");
    expect(LIFE_STATUS_WORDS.no_date).toMatch(/piping class/);
    expect(LIFE_STATUS_WORDS.below_required).toBe(BELOW_REQUIRED_WORDS);
  });
});

function addDaysIso(date: string, days: number): string {
  const t =
    Date.UTC(Number(date.slice(0, 4)), Number(date.slice(5, 7)) - 1, Number(date.slice(8, 10))) + days * 86_400_000;
  return new Date(t).toISOString().slice(0, 10);
}
