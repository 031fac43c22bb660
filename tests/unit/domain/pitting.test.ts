import { describe, it, expect } from "vitest";
import fc from "fast-check";
import { pittingRate, pittingFactor, averagePenetrationMm, weightLossRate } from "../../../app/domain/index.ts";

function relDiff(actual: number, expected: number): number {
  return Math.abs(actual - expected) / Math.abs(expected);
}

describe("pittingRate (ASTM G46)", () => {
  it("a pit of 0.1 mm in 8760 h is 0.1 mm/y = 3.937 mpy (derived from the formula, 8760-hour year)", () => {
    const r = pittingRate({ maxPitDepthMm: 0.1, exposureHours: 8760 });
    expect(r.mmPerYear).toBeCloseTo(0.1, 14);
    expect(r.mpy).toBeCloseTo(0.1 / 0.0254, 12);
  });

  it("a pit of 0.2 mm in 90 days annualises to 0.2 × 365/90 mm/y (derived from the formula)", () => {
    expect(pittingRate({ maxPitDepthMm: 0.2, exposureHours: 90 * 24 }).mmPerYear).toBeCloseTo((0.2 * 365) / 90, 12);
  });

  it("no pit (depth 0) gives a zero rate", () => {
    expect(pittingRate({ maxPitDepthMm: 0, exposureHours: 100 })).toEqual({ mmPerYear: 0, mpy: 0 });
  });

  it("a pit as deep as the coupon (perforation) is allowed; deeper throws naming maxPitDepthMm", () => {
    expect(pittingRate({ maxPitDepthMm: 1.6, exposureHours: 8760, couponThicknessMm: 1.6 }).mmPerYear).toBeCloseTo(
      1.6,
      12,
    );
    expect(() => pittingRate({ maxPitDepthMm: 1.7, exposureHours: 8760, couponThicknessMm: 1.6 })).toThrow(
      /^maxPitDepthMm must be <= couponThicknessMm 1.6 \(got 1.7\)/,
    );
  });

  it.each([
    [{ maxPitDepthMm: -0.1, exposureHours: 100 }, /^maxPitDepthMm must be >= 0 \(got -0.1\)/],
    [{ maxPitDepthMm: 0.1, exposureHours: 0 }, /^exposureHours must be > 0 \(got 0\)/],
    [{ maxPitDepthMm: Number.NaN, exposureHours: 10 }, /^maxPitDepthMm /],
    [{ maxPitDepthMm: 0.1, exposureHours: 10, couponThicknessMm: 0 }, /^couponThicknessMm must be > 0/],
  ])("invalid %o throws RangeError", (input, message) => {
    expect(() => pittingRate(input)).toThrow(RangeError);
    expect(() => pittingRate(input)).toThrow(message);
  });
});

describe("pittingFactor (ASTM G46)", () => {
  it("average penetration d = W/(D·A): 7.86 g over 100 cm² of steel (7.86 g/cm³) is 0.01 cm = 0.1 mm (derived)", () => {
    expect(averagePenetrationMm(7.86, 100, 7.86)).toBeCloseTo(0.1, 14);
  });

  it("pitting factor = deepest pit / average penetration: 0.5 mm / 0.1 mm = 5 (published definition, derived)", () => {
    expect(pittingFactor({ maxPitDepthMm: 0.5, massLossG: 7.86, areaCm2: 100, densityGcm3: 7.86 })).toBeCloseTo(5, 12);
  });

  it("equals pitting rate / general rate over the same exposure (derived from the definitions)", () => {
    fc.assert(
      fc.property(
        fc.double({ min: 1e-3, max: 5, noNaN: true }),
        fc.double({ min: 1e-3, max: 10, noNaN: true }),
        fc.double({ min: 1, max: 200, noNaN: true }),
        fc.double({ min: 1, max: 20, noNaN: true }),
        fc.double({ min: 24, max: 1e5, noNaN: true }),
        (depth, W, A, D, hours) => {
          const pf = pittingFactor({ maxPitDepthMm: depth, massLossG: W, areaCm2: A, densityGcm3: D });
          const ratio =
            pittingRate({ maxPitDepthMm: depth, exposureHours: hours }).mmPerYear /
            weightLossRate({ massLossG: W, areaCm2: A, exposureHours: hours, densityGcm3: D }).mmPerYear;
          expect(relDiff(pf, ratio)).toBeLessThan(1e-12);
        },
      ),
    );
  });

  it("zero mass loss throws (issue rule): the average penetration would be zero", () => {
    expect(() => pittingFactor({ maxPitDepthMm: 0.2, massLossG: 0, areaCm2: 20, densityGcm3: 7.86 })).toThrow(
      RangeError,
    );
    expect(() => pittingFactor({ maxPitDepthMm: 0.2, massLossG: 0, areaCm2: 20, densityGcm3: 7.86 })).toThrow(
      /^massLossG must be > 0 for a pitting factor \(got 0\)/,
    );
  });

  it.each([
    [{ maxPitDepthMm: 0.2, massLossG: -0.1, areaCm2: 20, densityGcm3: 7.86 }, /^massLossG must be > 0 \(got -0.1\)/],
    [{ maxPitDepthMm: -1, massLossG: 0.1, areaCm2: 20, densityGcm3: 7.86 }, /^maxPitDepthMm /],
    [{ maxPitDepthMm: 0.2, massLossG: 0.1, areaCm2: 0, densityGcm3: 7.86 }, /^areaCm2 must be > 0/],
    [{ maxPitDepthMm: 0.2, massLossG: 0.1, areaCm2: 20, densityGcm3: -7.86 }, /^densityGcm3 must be > 0/],
    [
      { maxPitDepthMm: 2, massLossG: 0.1, areaCm2: 20, densityGcm3: 7.86, couponThicknessMm: 1.5 },
      /^maxPitDepthMm must be <= couponThicknessMm/,
    ],
  ])("invalid %o throws RangeError", (input, message) => {
    expect(() => pittingFactor(input)).toThrow(RangeError);
    expect(() => pittingFactor(input)).toThrow(message);
  });
});
