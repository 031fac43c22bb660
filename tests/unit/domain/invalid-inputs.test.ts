import { describe, it, expect } from "vitest";
import fc from "fast-check";
import * as domain from "../../../app/domain/index.ts";
import { assessCoupon } from "../../../app/domain/index.ts";

/**
 * The library's contract, in two halves:
 * - an input outside its physical range throws a FieldRangeError (a RangeError) whose
 *   `field` is the offending input and whose message starts with it — never NaN;
 * - inputs in and near the valid domain (plausible coupons, small losses and gains,
 *   1–400 days) give finite, non-negative rates when a rate can be determined, and say
 *   "not determinable" / "not graded" exactly when it cannot.
 * The generators are common practice for coupon work, not check values; fast-check takes
 * its seed from tests/helpers/setup.ts (fixed in CI, WALLCAST_FC_SEED to replay).
 */

/** Values that are never a usable number. */
const notANumber = fc.oneof(
  fc.constant(Number.NaN),
  fc.constant(Number.POSITIVE_INFINITY),
  fc.constant(Number.NEGATIVE_INFINITY),
  fc.string(),
  fc.constant(null),
  fc.constant(undefined),
  fc.boolean(),
  fc.object(),
  fc.array(fc.integer()),
);
/** Invalid for a field that must be > 0. */
const badPositive = fc.oneof(notANumber, fc.double({ max: 0, noNaN: true }));
/** Invalid for a field that must be ≥ 0 (−0 counts as 0, so strictly negative). */
const badNonNegative = fc.oneof(notANumber, fc.double({ max: -Number.MIN_VALUE, noNaN: true }));

type Case = {
  name: string;
  call: (input: Record<string, unknown>) => unknown;
  valid: Record<string, unknown>;
  fields: Record<string, fc.Arbitrary<unknown>>;
};

const cases: Case[] = [
  {
    name: "weightLossRate",
    call: (i) => domain.weightLossRate(i as never),
    valid: { massLossG: 0.1, areaCm2: 20, exposureHours: 2000, densityGcm3: 7.86 },
    fields: { massLossG: badNonNegative, areaCm2: badPositive, exposureHours: badPositive, densityGcm3: badPositive },
  },
  {
    name: "couponArea (strip)",
    call: (i) => domain.couponArea(i as never),
    valid: { shape: "strip", lengthMm: 76, widthMm: 13, thicknessMm: 1.6, holeDiameterMm: 6 },
    fields: {
      lengthMm: badPositive,
      widthMm: badPositive,
      thicknessMm: badPositive,
      holeDiameterMm: fc.oneof(
        badNonNegative.filter((v) => v !== undefined),
        fc.double({ min: 13, max: 1e6, noNaN: true }),
      ),
    },
  },
  {
    name: "pittingRate",
    call: (i) => domain.pittingRate(i as never),
    valid: { maxPitDepthMm: 0.2, exposureHours: 2000 },
    fields: { maxPitDepthMm: badNonNegative, exposureHours: badPositive },
  },
  {
    name: "pittingFactor",
    call: (i) => domain.pittingFactor(i as never),
    valid: { maxPitDepthMm: 0.2, massLossG: 0.1, areaCm2: 20, densityGcm3: 7.86 },
    fields: { maxPitDepthMm: badNonNegative, massLossG: badPositive, areaCm2: badPositive, densityGcm3: badPositive },
  },
  {
    name: "corrosionCurrentDensity",
    call: (i) => domain.corrosionCurrentDensity(i as never),
    valid: { bMv: 26, polarizationResistanceOhmCm2: 1000 },
    fields: { bMv: badPositive, polarizationResistanceOhmCm2: badPositive },
  },
  {
    name: "faradayRate",
    call: (i) => domain.faradayRate(i as never),
    valid: { currentDensityUAcm2: 5, equivalentWeight: 27.92, densityGcm3: 7.86 },
    fields: { currentDensityUAcm2: badNonNegative, equivalentWeight: badPositive, densityGcm3: badPositive },
  },
  {
    name: "pressureDesignThickness",
    call: (i) => domain.pressureDesignThickness(i as never),
    valid: {
      pressureMPa: 2,
      outsideDiameterMm: 168.3,
      allowableStressMPa: 138,
      jointEfficiency: 1,
      weldStrengthFactor: 1,
      yCoefficient: 0.4,
    },
    fields: {
      pressureMPa: badPositive,
      outsideDiameterMm: badPositive,
      allowableStressMPa: badPositive,
      jointEfficiency: fc.oneof(badPositive, fc.double({ min: 1.0000001, max: 100, noNaN: true })),
      weldStrengthFactor: fc.oneof(badPositive, fc.double({ min: 1.0000001, max: 100, noNaN: true })),
      yCoefficient: fc.oneof(badNonNegative, fc.double({ min: 1, max: 100, noNaN: true })),
    },
  },
  {
    name: "remainingLife",
    call: (i) => domain.remainingLife(i as never),
    valid: { actualMm: 9, requiredMm: 6, rateMmPerYear: 0.2 },
    fields: { actualMm: badNonNegative, requiredMm: badNonNegative, rateMmPerYear: notANumber },
  },
  {
    name: "nextInspection",
    call: (i) => domain.nextInspection(i as never),
    valid: { remainingLifeYears: 12, pipingClass: 2, inspectedOn: "2024-01-01" },
    fields: {
      remainingLifeYears: fc.oneof(
        fc.constant(Number.NaN),
        fc.double({ max: -Number.MIN_VALUE, noNaN: true }),
        fc.string(),
        fc.constant(null),
      ),
      pipingClass: fc.oneof(
        fc.integer({ min: 5, max: 100 }),
        fc.constant(0),
        fc.constant("1"),
        fc.constant(null),
        fc.string(),
      ),
      inspectedOn: fc.oneof(
        fc.string().filter((s) => !domain.isIsoDay(s)),
        fc.integer(),
        fc.constant(null),
      ),
      maxIntervalYears: badPositive.filter((v) => v !== undefined),
    },
  },
  {
    name: "sacrificialAnodeLife",
    call: (i) => domain.sacrificialAnodeLife(i as never),
    valid: { massKg: 100, capacityAhPerKg: 2000, utilizationFactor: 0.9, currentA: 1 },
    fields: {
      massKg: badPositive,
      capacityAhPerKg: badPositive,
      utilizationFactor: fc.oneof(badPositive, fc.double({ min: 1.0000001, max: 10, noNaN: true })),
      currentA: badPositive,
    },
  },
];

/** Names a generated value for a failure message; never throws (null-prototype objects included). */
function describe_(value: unknown): string {
  try {
    return typeof value === "object" && value !== null ? (JSON.stringify(value) ?? "an object") : String(value);
  } catch {
    return `a ${typeof value}`;
  }
}

describe("every out-of-domain field is refused with a FieldRangeError naming it, never NaN (property)", () => {
  for (const c of cases) {
    it(c.name, () => {
      const fieldNames = Object.keys(c.fields);
      fc.assert(
        fc.property(
          fc.constantFrom(...fieldNames).chain((field) => c.fields[field].map((value) => [field, value] as const)),
          ([field, value]) => {
            let thrown: unknown;
            try {
              c.call({ ...c.valid, [field]: value });
            } catch (error) {
              thrown = error;
            }
            expect(thrown, `${field} = ${describe_(value)}`).toBeInstanceOf(domain.FieldRangeError);
            expect((thrown as domain.FieldRangeError).field, (thrown as RangeError).message).toBe(field);
            expect((thrown as RangeError).message.startsWith(field), (thrown as RangeError).message).toBe(true);
          },
        ),
        { numRuns: 300 },
      );
    });
  }
});

/* ------------------------------------------------------------------ in and near the valid domain */

/** Millimetre dimensions of coupons as labs cut them (common practice), not check values. */
const mm = (min: number, max: number) => fc.double({ min, max, noNaN: true, noDefaultInfinity: true });

/** Plausible coupon geometries; a hole is at most half the narrowest dimension. */
const geometryArb: fc.Arbitrary<domain.CouponGeometry> = fc.oneof(
  fc
    .record({ L: mm(20, 150), W: mm(10, 50), t: mm(0.5, 6), hole: fc.oneof(fc.constant(0), mm(0, 0.5)) })
    .map(({ L, W, t, hole }) => ({
      shape: "strip" as const,
      lengthMm: L,
      widthMm: W,
      thicknessMm: t,
      holeDiameterMm: hole * Math.min(L, W),
    })),
  fc
    .record({ D: mm(10, 60), t: mm(0.5, 6), hole: fc.oneof(fc.constant(0), mm(0, 0.5)) })
    .map(({ D, t, hole }) => ({ shape: "disc" as const, diameterMm: D, thicknessMm: t, holeDiameterMm: hole * D })),
  fc
    .record({ D: mm(3, 25), L: mm(20, 150), ends: fc.constantFrom(0 as const, 1 as const, 2 as const) })
    .map(({ D, L, ends }) => ({ shape: "rod" as const, diameterMm: D, lengthMm: L, exposedEnds: ends })),
  mm(10, 60).map((D) => ({ shape: "flush-disc" as const, diameterMm: D })),
);

/** The deepest a pit can be on this geometry: its thickness, a rod's radius, 2 mm on a flush disc (assumed). */
function pitLimitMm(g: domain.CouponGeometry): number {
  if (g.shape === "strip" || g.shape === "disc") return g.thicknessMm;
  if (g.shape === "rod") return g.diameterMm / 2;
  return 2;
}

/** A mass change in g: mostly small losses, sometimes none, sometimes a small gain (a weighing or cleaning problem). */
const massChangeArb = fc.oneof(
  { weight: 6, arbitrary: fc.double({ min: 1e-4, max: 1, noNaN: true }) },
  { weight: 1, arbitrary: fc.constant(0) },
  { weight: 2, arbitrary: fc.double({ min: -0.05, max: -1e-4, noNaN: true }) },
);

/** Increasing owner thresholds, mm/y. */
const thresholdsArb = fc
  .tuple(mm(0.001, 0.1), mm(0.001, 0.2), mm(0.001, 0.5))
  .map(([a, b, c]) => ({ moderate: a, high: a + b, severe: a + b + c }));

const INSTALLED_MS = Date.parse("2026-01-01T00:00:00Z");

const pullArb = fc.record({
  geometry: geometryArb,
  material: fc.option(fc.constantFrom(...domain.MATERIALS), { nil: null }),
  initialMassG: mm(5, 200),
  lossG: massChangeArb,
  blank: fc.option(fc.record({ initialG: mm(5, 50), lossG: fc.double({ min: 0, max: 0.01, noNaN: true }) }), {
    nil: null,
  }),
  exposureMinutes: fc.integer({ min: 1 * 1440, max: 400 * 1440 }),
  pitFractions: fc.array(fc.double({ min: 0, max: 1, noNaN: true }), { maxLength: 3 }),
  familyThresholds: fc.option(fc.record({ general: thresholdsArb, pitting: thresholdsArb }), { nil: null }),
});

type Pull = typeof pullArb extends fc.Arbitrary<infer T> ? T : never;

function inputOf(p: Pull): domain.CouponResultInput {
  const finalMassG = p.initialMassG - p.lossG;
  const family = p.material?.family ?? "carbon-steel";
  const limit = pitLimitMm(p.geometry);
  return {
    geometry: p.geometry,
    densityGcm3: p.material?.densityGcm3 ?? 7.86,
    densitySource: p.material?.densitySource ?? "ASTM G1 appendix, carbon steel (from memory)",
    materialKey: p.material?.key ?? null,
    initialMassG: p.initialMassG,
    balanceResolutionG: 0.0001,
    installedAt: new Date(INSTALLED_MS).toISOString(),
    removedAt: new Date(INSTALLED_MS + p.exposureMinutes * 60_000).toISOString(),
    // With a blank the coupon's one cleaning cycle is given as a cycle mass, as the lab form sends it.
    couponMassesG: p.blank ? [finalMassG] : [],
    finalMassG: p.blank ? undefined : finalMassG,
    blankInitialMassG: p.blank ? p.blank.initialG : null,
    blankMassesG: p.blank ? [p.blank.initialG - p.blank.lossG] : [],
    pitDepthsMm: p.pitFractions.map((f) => f * limit),
    familyThresholds: p.familyThresholds && family !== "carbon-steel" ? { [family]: p.familyThresholds } : undefined,
  };
}

function expectFiniteNonNegative(value: number, what: string) {
  expect(Number.isFinite(value), `${what} = ${value}`).toBe(true);
  expect(value, what).toBeGreaterThanOrEqual(0);
}

describe("in and near the valid domain: the invariants hold (property)", () => {
  it("couponArea of a plausible coupon is finite and > 0", () => {
    fc.assert(
      fc.property(geometryArb, (g) => {
        const a = domain.couponArea(g);
        expect(Number.isFinite(a)).toBe(true);
        expect(a).toBeGreaterThan(0);
      }),
      { numRuns: 500 },
    );
  });

  it("weightLossRate of a small loss over 1–400 days is finite and ≥ 0 in every unit; a gain is refused", () => {
    fc.assert(
      fc.property(
        geometryArb,
        massChangeArb,
        fc.integer({ min: 24, max: 400 * 24 }),
        fc.constantFrom(...domain.MATERIALS),
        (g, change, hours, material) => {
          const input = {
            massLossG: change,
            areaCm2: domain.couponArea(g),
            exposureHours: hours,
            densityGcm3: material.densityGcm3,
          };
          if (change < 0) {
            expect(() => domain.weightLossRate(input)).toThrow(domain.FieldRangeError);
            return;
          }
          const r = domain.weightLossRate(input);
          for (const [unitName, v] of Object.entries(r)) expectFiniteNonNegative(v, unitName);
          // mpy = mm/y ÷ 0.0254 exactly (1 mil = 0.0254 mm, derived); 1e-12 allows floating-point rounding only.
          expect(Math.abs(r.mpy * 0.0254 - r.mmPerYear)).toBeLessThanOrEqual(1e-12 * r.mmPerYear);
        },
      ),
      { numRuns: 500 },
    );
  });

  it("pittingRate and pittingFactor of a pit within the coupon are finite and ≥ 0", () => {
    fc.assert(
      fc.property(
        geometryArb,
        fc.double({ min: 0, max: 1, noNaN: true }),
        fc.double({ min: 1e-4, max: 1, noNaN: true }),
        fc.integer({ min: 24, max: 400 * 24 }),
        (g, fraction, lossG, hours) => {
          const depth = fraction * pitLimitMm(g);
          const rate = domain.pittingRate({ maxPitDepthMm: depth, exposureHours: hours });
          expectFiniteNonNegative(rate.mmPerYear, "pitting mm/y");
          expectFiniteNonNegative(rate.mpy, "pitting mpy");
          const factor = domain.pittingFactor({
            maxPitDepthMm: depth,
            massLossG: lossG,
            areaCm2: domain.couponArea(g),
            densityGcm3: 7.86,
          });
          expectFiniteNonNegative(factor, "pitting factor");
        },
      ),
      { numRuns: 500 },
    );
  });

  it("assessCoupon: rates finite and ≥ 0 when determinable, not determinable on a gain, severity null exactly when not graded", () => {
    fc.assert(
      fc.property(pullArb, (p) => {
        const input = inputOf(p);
        const o = assessCoupon(input);
        if (!o.ok) throw new Error(`valid pull refused: ${JSON.stringify(o.errors)}`);
        const r = o.result;
        const family = p.material?.family ?? "carbon-steel";

        // Exposure and area are what was entered.
        expect(r.exposureDays).toBeCloseTo(p.exposureMinutes / 1440, 9);
        expect(r.areaCm2).toBe(domain.couponArea(p.geometry));

        // Determinable exactly when the coupon lost mass (≥ 0) and the blank did not lose more.
        const { rawG, blankLossG, correctedG } = r.massLoss;
        const expectDeterminable = rawG >= 0 && (blankLossG === null || blankLossG <= rawG);
        expect(r.determinable).toBe(expectDeterminable);
        if (rawG < 0) expect(r.flags.map((f) => f.code)).toContain("mass-gain");
        if (r.determinable) {
          expect(r.notDeterminableReason).toBeNull();
          expect(correctedG).not.toBeNull();
          expectFiniteNonNegative(correctedG as number, "correctedG");
          // Blank correction subtracts the blank's loss (ASTM G1 / NACE SP0775 practice, derived).
          expect(correctedG as number).toBeCloseTo(rawG - (blankLossG ?? 0), 12);
          expect(r.rate).not.toBeNull();
          for (const [unitName, v] of Object.entries(r.rate ?? {})) expectFiniteNonNegative(v, unitName);
          // CR = 8.76×10⁴·W/(A·T·D) (ASTM G1 §8, published K); 1e-12 relative allows rounding only.
          const expected = (8.76e4 * (correctedG as number)) / (r.areaCm2 * r.exposureHours * input.densityGcm3);
          expect(Math.abs((r.rate?.mmPerYear ?? NaN) - expected)).toBeLessThanOrEqual(1e-12 * expected);
        } else {
          expect(r.notDeterminableReason).toMatch(/no corrosion rate can be determined/);
          expect(r.rate).toBeNull();
          expect(correctedG).toBeNull();
        }

        // Severity: null exactly when not graded, and the basis says so.
        const gradedFamily = family === "carbon-steel" || p.familyThresholds !== null;
        expect(r.severity.general === null).toBe(!r.determinable || !gradedFamily);
        expect(r.severity.general === null).toBe(r.severity.generalBasis.startsWith("not graded"));
        if (r.severity.general !== null) expect(domain.SEVERITY_LEVELS).toContain(r.severity.general);

        // Pitting: present exactly when pit depths were entered; its rate is finite and ≥ 0.
        expect(r.pitting === null).toBe(p.pitFractions.length === 0);
        if (r.pitting) {
          expectFiniteNonNegative(r.pitting.mmPerYear, "pitting mm/y");
          expectFiniteNonNegative(r.pitting.mpy, "pitting mpy");
          // A pitting factor needs a pit and a positive loss (ASTM G46 definition, derived).
          const factorDefined = correctedG !== null && correctedG > 0 && r.pitting.maxPitDepthMm > 0;
          expect(r.pitting.factor !== null).toBe(factorDefined);
          if (r.pitting.factor !== null) expectFiniteNonNegative(r.pitting.factor, "pitting factor");
          expect(r.severity.pitting === null).toBe(!r.determinable || !gradedFamily);
          expect(r.severity.pitting === null).toBe((r.severity.pittingBasis ?? "").startsWith("not graded"));
        } else {
          expect(r.severity.pitting).toBeNull();
          expect(r.severity.pittingBasis).toBeNull();
        }

        // The worst grade is one of the two, and null only when neither was graded.
        const grades = [r.severity.general, r.severity.pitting].filter((s) => s !== null);
        if (grades.length === 0) {
          expect(r.severity.worst).toBeNull();
          expect(r.severity.worstKind).toBeNull();
        } else {
          expect(grades).toContain(r.severity.worst);
          expect(r.severity.worstKind && r.severity[r.severity.worstKind]).toBe(r.severity.worst);
        }
      }),
      { numRuns: 400 },
    );
  });
});

describe("just outside the valid domain: assessCoupon names a form field, never a NaN result (property)", () => {
  it("a density or coupon dimension ≤ 0 or not finite is an error on its field", () => {
    const bad = fc.oneof(
      fc.constant(Number.NaN),
      fc.constant(Number.POSITIVE_INFINITY),
      fc.double({ min: -10, max: 0, noNaN: true }),
    );
    fc.assert(
      fc.property(
        pullArb,
        fc.constantFrom("densityGcm3", "diameterMm", "thicknessMm", "lengthMm"),
        bad,
        (p, field, value) => {
          const input = inputOf(p);
          const geometry = { ...input.geometry } as Record<string, unknown>;
          if (field !== "densityGcm3") {
            fc.pre(field in geometry);
            geometry[field] = value;
          }
          const o = assessCoupon({
            ...input,
            // Without pits, so that a pit "deeper" than a negative thickness does not answer first.
            pitDepthsMm: [],
            geometry: geometry as domain.CouponGeometry,
            densityGcm3: field === "densityGcm3" ? value : input.densityGcm3,
          });
          expect(o.ok).toBe(false);
          if (o.ok) return;
          expect(Object.keys(o.errors)).toEqual([field === "densityGcm3" ? "density" : "geometry"]);
          expect(Object.values(o.errors)[0]).toMatch(new RegExp(`^${field} must be`));
        },
      ),
      { numRuns: 300 },
    );
  });
});
