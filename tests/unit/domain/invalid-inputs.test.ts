import { describe, it, expect } from "vitest";
import fc from "fast-check";
import * as domain from "../../../app/domain/index.ts";

/**
 * Invariant from the library's contract: every invalid input throws a
 * RangeError whose message starts with the offending property's name, and
 * nothing ever returns NaN or a negative rate instead.
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

describe("every invalid field throws a RangeError that starts with the field's name (property)", () => {
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
            expect(thrown, `${field} = ${describe_(value)}`).toBeInstanceOf(RangeError);
            expect((thrown as RangeError).message.startsWith(field), (thrown as RangeError).message).toBe(true);
          },
        ),
        { numRuns: 300 },
      );
    });
  }
});

/**
 * Collects every number in a result, however nested — except fitted slopes
 * (regression and cleaning-curve), which are signed by definition.
 */
function numbersIn(value: unknown, out: number[] = []): number[] {
  if (typeof value === "number") out.push(value);
  else if (value !== null && typeof value === "object") {
    for (const [key, v] of Object.entries(value)) if (!key.startsWith("slope")) numbersIn(v, out);
  }
  return out;
}

describe("arbitrary input never yields NaN, a negative number or a non-RangeError (property)", () => {
  const functions: [string, (a: unknown, b: unknown, c: unknown) => unknown][] = [
    ["couponArea", (a) => domain.couponArea(a as never)],
    ["weightLossRate", (a) => domain.weightLossRate(a as never)],
    ["cleaningCurveCorrection", (a, b) => domain.cleaningCurveCorrection(a as never, b as never)],
    ["pittingRate", (a) => domain.pittingRate(a as never)],
    ["pittingFactor", (a) => domain.pittingFactor(a as never)],
    ["severity", (a, b, c) => domain.severity(a as never, b as never, c as never)],
    ["equivalentWeight", (a, b) => domain.equivalentWeight(a as never, b as never)],
    ["sternGearyB", (a, b) => domain.sternGearyB(a as never, b as never)],
    ["faradayRate", (a) => domain.faradayRate(a as never)],
    ["pressureDesignThickness", (a) => domain.pressureDesignThickness(a as never)],
    ["thicknessRates", (a, b) => domain.thicknessRates(a as never, b as never)],
    ["remainingLife", (a) => domain.remainingLife(a as never)],
    ["nextInspection", (a) => domain.nextInspection(a as never)],
    ["sacrificialAnodeLife", (a) => domain.sacrificialAnodeLife(a as never)],
    ["regressionRate", (a, b) => domain.regressionRate(a as never, b as never)],
    ["couponQualityFlags", (a) => domain.couponQualityFlags(a as never)],
  ];
  for (const [name, fn] of functions) {
    it(name, () => {
      fc.assert(
        fc.property(fc.anything(), fc.anything(), fc.anything(), (a, b, c) => {
          let result: unknown;
          try {
            result = fn(a, b, c);
          } catch (error) {
            expect(error).toBeInstanceOf(RangeError);
            return;
          }
          for (const n of numbersIn(result)) {
            expect(Number.isNaN(n)).toBe(false);
            expect(n).toBeGreaterThanOrEqual(0);
          }
        }),
        { numRuns: 300 },
      );
    });
  }
});
