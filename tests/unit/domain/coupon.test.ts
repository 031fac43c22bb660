import { describe, it, expect } from "vitest";
import fc from "fast-check";
import { unit } from "mathjs";
import type { Unit } from "mathjs";
import {
  couponArea,
  weightLossRate,
  massLoss,
  blankCorrectedMassLoss,
  cleaningCurveCorrection,
} from "../../../app/domain/index.ts";

/** mathjs types a quotient as `Unit | number`; these quotients always keep a unit. */
const over = (a: Unit, b: Unit): Unit => a.divide(b) as Unit;

function relDiff(actual: number, expected: number): number {
  return Math.abs(actual - expected) / Math.abs(expected);
}

describe("couponArea", () => {
  it("strip 76.2 × 12.7 × 1.6 mm without hole is 22.1996 cm² (derived by hand)", () => {
    // 2(LW + Lt + Wt) = 2(967.74 + 121.92 + 20.32) mm² = 2219.96 mm² = 22.1996 cm²; exact in decimals,
    // so the tolerance only allows floating-point rounding.
    const a = couponArea({ shape: "strip", lengthMm: 76.2, widthMm: 12.7, thicknessMm: 1.6 });
    expect(a).toBeCloseTo(22.1996, 10);
  });

  it("holeDiameterMm 0 means no hole (issue rule)", () => {
    const without = couponArea({ shape: "strip", lengthMm: 76.2, widthMm: 12.7, thicknessMm: 1.6 });
    const zero = couponArea({ shape: "strip", lengthMm: 76.2, widthMm: 12.7, thicknessMm: 1.6, holeDiameterMm: 0 });
    expect(zero).toBe(without);
  });

  // Worked by hand from the area formulas of the reference sheet [der]. Each hand value is
  // written to 7–8 significant digits (π = 3.14159265), so toBeCloseTo(…, 5) — within 5×10⁻⁶ cm² —
  // allows that rounding of the hand value and nothing more.

  it("strip 50 × 20 × 2 mm with one 5 mm hole is 22.72146 cm² (derived by hand)", () => {
    // A = 2(LW + Lt + Wt) − 2·πd²/4 + π·d·t
    //   LW = 50·20 = 1000, Lt = 50·2 = 100, Wt = 20·2 = 40 → 2 × 1140 = 2280 mm²
    //   2·πd²/4 = 2·π·25/4 = 12.5π = 39.269908 mm² (the hole removed from both faces)
    //   π·d·t = π·5·2 = 10π = 31.415927 mm² (the hole's bore)
    //   A = 2280 − 39.269908 + 31.415927 = 2272.146018 mm² = 22.72146018 cm²
    const a = couponArea({ shape: "strip", lengthMm: 50, widthMm: 20, thicknessMm: 2, holeDiameterMm: 5 });
    expect(a).toBeCloseTo(22.72146, 5);
  });

  it("disc Ø40 × 2 mm with a 10 mm centre hole is 26.70354 cm² (derived by hand)", () => {
    // A = (π/2)(D² − d²) + π·D·t + π·d·t
    //   (π/2)(1600 − 100) = 750π = 2356.194490 mm² (both faces)
    //   π·D·t = π·40·2 = 80π = 251.327412 mm² (the rim)
    //   π·d·t = π·10·2 = 20π = 62.831853 mm² (the hole's bore)
    //   A = 850π = 2670.353756 mm² = 26.70353756 cm²
    const a = couponArea({ shape: "disc", diameterMm: 40, thicknessMm: 2, holeDiameterMm: 10 });
    expect(a).toBeCloseTo(26.70354, 5);
  });

  it("rod Ø10 × 50 mm: 17.27876 cm² with both ends exposed, 16.49336 cm² with one, 15.70796 cm² with none (derived by hand)", () => {
    // πDL = π·10·50 = 500π = 1570.796327 mm² (the side)
    // both ends: πD²/2 = π·100/2 = 50π = 157.079633 mm² → 550π = 1727.875959 mm² = 17.27875959 cm²
    // one end:   πD²/4 = π·100/4 = 25π = 78.539816 mm²  → 525π = 1649.336143 mm² = 16.49336143 cm²
    // no end:    500π = 1570.796327 mm² = 15.70796327 cm²
    expect(couponArea({ shape: "rod", diameterMm: 10, lengthMm: 50, exposedEnds: 2 })).toBeCloseTo(17.27876, 5);
    expect(couponArea({ shape: "rod", diameterMm: 10, lengthMm: 50, exposedEnds: 1 })).toBeCloseTo(16.49336, 5);
    expect(couponArea({ shape: "rod", diameterMm: 10, lengthMm: 50, exposedEnds: 0 })).toBeCloseTo(15.70796, 5);
  });

  it("flush disc Ø20 mm, one face wetted, is π cm² (derived by hand)", () => {
    // A = πD²/4 = π·400/4 = 100π mm² = π cm²; the same value, so only floating-point rounding is allowed.
    expect(couponArea({ shape: "flush-disc", diameterMm: 20 })).toBeCloseTo(Math.PI, 12);
  });

  it("a hole as wide as or wider than the strip or disc throws RangeError naming holeDiameterMm", () => {
    expect(() =>
      couponArea({ shape: "strip", lengthMm: 76.2, widthMm: 12.7, thicknessMm: 1.6, holeDiameterMm: 12.7 }),
    ).toThrow(/^holeDiameterMm must be < widthMm/);
    expect(() => couponArea({ shape: "strip", lengthMm: 10, widthMm: 30, thicknessMm: 1, holeDiameterMm: 12 })).toThrow(
      /^holeDiameterMm must be < lengthMm/,
    );
    expect(() => couponArea({ shape: "disc", diameterMm: 20, thicknessMm: 2, holeDiameterMm: 25 })).toThrow(
      /^holeDiameterMm must be < diameterMm/,
    );
  });

  it.each([
    [{ shape: "strip", lengthMm: -1, widthMm: 10, thicknessMm: 1 }, /^lengthMm must be > 0 \(got -1\)/],
    [{ shape: "strip", lengthMm: 10, widthMm: 0, thicknessMm: 1 }, /^widthMm must be > 0 \(got 0\)/],
    [
      { shape: "strip", lengthMm: 10, widthMm: 10, thicknessMm: Number.NaN },
      /^thicknessMm must be a finite number > 0 \(got NaN\)/,
    ],
    [{ shape: "strip", lengthMm: 10, widthMm: 10, thicknessMm: 1, holeDiameterMm: -2 }, /^holeDiameterMm must be >= 0/],
    [{ shape: "disc", diameterMm: Number.POSITIVE_INFINITY, thicknessMm: 1 }, /^diameterMm /],
    [{ shape: "rod", diameterMm: 5, lengthMm: 10, exposedEnds: 3 }, /^exposedEnds must be an integer from 0 to 2/],
    [{ shape: "rod", diameterMm: 5, lengthMm: 10 }, /^exposedEnds /],
    [{ shape: "flush-disc", diameterMm: "20" }, /^diameterMm /],
    [{ shape: "hexagon", diameterMm: 20 }, /^shape must be one of/],
  ])("invalid geometry %o throws RangeError", (geometry, message) => {
    expect(() => couponArea(geometry as never)).toThrow(RangeError);
    expect(() => couponArea(geometry as never)).toThrow(message);
  });

  it("a missing geometry throws RangeError", () => {
    expect(() => couponArea(undefined as never)).toThrow(/^geometry must be an object/);
  });

  it("area is positive and finite for every valid strip (property)", () => {
    fc.assert(
      fc.property(
        fc.double({ min: 1, max: 300, noNaN: true }),
        fc.double({ min: 1, max: 300, noNaN: true }),
        fc.double({ min: 0.1, max: 10, noNaN: true }),
        fc.double({ min: 0, max: 0.999, noNaN: true }),
        (L, W, t, holeFraction) => {
          const a = couponArea({
            shape: "strip",
            lengthMm: L,
            widthMm: W,
            thicknessMm: t,
            holeDiameterMm: holeFraction * Math.min(L, W),
          });
          expect(a).toBeGreaterThan(0);
          expect(Number.isFinite(a)).toBe(true);
        },
      ),
    );
  });
});

describe("weightLossRate", () => {
  const input = { massLossG: 0.1, areaCm2: 30, exposureHours: 2160, densityGcm3: 7.86 };

  it("mm/y = 8.76×10⁴·W/(A·T·D) (ASTM G1 §8 constant, published)", () => {
    const r = weightLossRate(input);
    expect(r.mmPerYear).toBeCloseTo((8.76e4 * 0.1) / (30 * 2160 * 7.86), 14);
  });

  it("mpy against the published K 3.45×10⁶ (ASTM G1 §8) within 0.05 % — the exact path is 0.03 % lower", () => {
    const r = weightLossRate(input);
    const published = (3.45e6 * 0.1) / (30 * 2160 * 7.86);
    expect(relDiff(r.mpy, published)).toBeLessThan(5e-4);
    expect(r.mpy).toBeCloseTo(r.mmPerYear / 0.0254, 12);
  });

  it("µm/y, mdd and g/(m²·h) follow the ASTM G1 K table (from memory): 8.76×10⁷, 2.40×10⁶·D, 1.00×10⁴·D", () => {
    const r = weightLossRate(input);
    const WATD = 0.1 / (30 * 2160 * 7.86);
    expect(r.umPerYear).toBeCloseTo(8.76e7 * WATD, 10);
    expect(r.mdd).toBeCloseTo(2.4e6 * 7.86 * WATD, 10);
    expect(r.gPerM2PerHour).toBeCloseTo(1e4 * 7.86 * WATD, 12);
  });

  it("agrees with a mathjs unit computation on the 8760-hour year (oracle: mathjs)", () => {
    const r = weightLossRate(input);
    const penetration = over(over(over(unit(0.1, "g"), unit(7.86, "g/cm^3")), unit(30, "cm^2")), unit(2160, "h"));
    expect(relDiff(r.mmPerYear, penetration.toNumber("mm/h") * 8760)).toBeLessThan(1e-12);
    const massRate = over(over(unit(0.1, "g"), unit(30, "cm^2")), unit(2160, "h"));
    expect(relDiff(r.mdd, massRate.toNumber("mg/dm^2/day"))).toBeLessThan(1e-12);
    expect(relDiff(r.gPerM2PerHour, massRate.toNumber("g/m^2/h"))).toBeLessThan(1e-12);
  });

  it("massLossG = 0 gives zero in every unit (issue rule)", () => {
    expect(weightLossRate({ ...input, massLossG: 0 })).toEqual({
      mmPerYear: 0,
      mpy: 0,
      umPerYear: 0,
      mdd: 0,
      gPerM2PerHour: 0,
    });
  });

  it.each([
    ["massLossG", -0.001, /^massLossG must be >= 0 \(got -0.001\)/],
    ["areaCm2", -1, /^areaCm2 must be > 0 \(got -1\)/],
    ["areaCm2", 0, /^areaCm2 must be > 0 \(got 0\)/],
    ["exposureHours", 0, /^exposureHours must be > 0 \(got 0\)/],
    ["densityGcm3", 0, /^densityGcm3 must be > 0 \(got 0\)/],
    ["densityGcm3", Number.NaN, /^densityGcm3 must be a finite number > 0 \(got NaN\)/],
    ["massLossG", Number.POSITIVE_INFINITY, /^massLossG /],
    ["exposureHours", "2160", /^exposureHours /],
    ["areaCm2", undefined, /^areaCm2 /],
  ])("%s = %s throws RangeError naming the field", (field, value, message) => {
    expect(() => weightLossRate({ ...input, [field]: value })).toThrow(RangeError);
    expect(() => weightLossRate({ ...input, [field]: value })).toThrow(message);
  });

  it("is linear in mass loss and inverse in area, time and density (property)", () => {
    fc.assert(
      fc.property(
        fc.double({ min: 1e-4, max: 100, noNaN: true }),
        fc.double({ min: 0.1, max: 1000, noNaN: true }),
        fc.double({ min: 1, max: 1e5, noNaN: true }),
        fc.double({ min: 1, max: 25, noNaN: true }),
        fc.double({ min: 0.1, max: 10, noNaN: true }),
        (W, A, T, D, k) => {
          const base = weightLossRate({ massLossG: W, areaCm2: A, exposureHours: T, densityGcm3: D }).mmPerYear;
          expect(
            relDiff(
              weightLossRate({ massLossG: k * W, areaCm2: A, exposureHours: T, densityGcm3: D }).mmPerYear,
              k * base,
            ),
          ).toBeLessThan(1e-12);
          expect(
            relDiff(
              weightLossRate({ massLossG: W, areaCm2: k * A, exposureHours: T, densityGcm3: D }).mmPerYear,
              base / k,
            ),
          ).toBeLessThan(1e-12);
          expect(
            relDiff(
              weightLossRate({ massLossG: W, areaCm2: A, exposureHours: k * T, densityGcm3: D }).mmPerYear,
              base / k,
            ),
          ).toBeLessThan(1e-12);
          expect(
            relDiff(
              weightLossRate({ massLossG: W, areaCm2: A, exposureHours: T, densityGcm3: k * D }).mmPerYear,
              base / k,
            ),
          ).toBeLessThan(1e-12);
        },
      ),
    );
  });

  it("never returns a negative or non-finite rate for valid inputs (property)", () => {
    fc.assert(
      fc.property(
        fc.double({ min: 0, max: 1e3, noNaN: true }),
        fc.double({ min: 1e-3, max: 1e4, noNaN: true }),
        fc.double({ min: 1e-3, max: 1e6, noNaN: true }),
        fc.double({ min: 0.5, max: 25, noNaN: true }),
        (W, A, T, D) => {
          const r = weightLossRate({ massLossG: W, areaCm2: A, exposureHours: T, densityGcm3: D });
          for (const v of Object.values(r)) {
            expect(v).toBeGreaterThanOrEqual(0);
            expect(Number.isFinite(v)).toBe(true);
          }
        },
      ),
    );
  });
});

describe("mass loss helpers", () => {
  it("massLoss is initial − final; a gain is negative, for the quality flags (derived from the definition)", () => {
    expect(massLoss(10.5, 10.25)).toBeCloseTo(0.25, 12);
    expect(massLoss(10, 10.01)).toBeCloseTo(-0.01, 12);
    expect(() => massLoss(0, 1)).toThrow(/^initialMassG must be > 0/);
    expect(() => massLoss(1, Number.NaN)).toThrow(/^finalMassG /);
  });

  it("blank correction subtracts the control coupon's loss (NACE SP0775 / ASTM G1 practice, derived)", () => {
    expect(blankCorrectedMassLoss(0.125, 0.002)).toBeCloseTo(0.123, 12);
    expect(blankCorrectedMassLoss(0.125, 0)).toBe(0.125);
  });

  it("a blank that lost more than the coupon throws rather than return a negative loss", () => {
    expect(() => blankCorrectedMassLoss(0.001, 0.002)).toThrow(/^blankLossG must be <= couponLossG/);
    expect(() => blankCorrectedMassLoss(-0.1, 0)).toThrow(/^couponLossG must be >= 0/);
    expect(() => blankCorrectedMassLoss(0.1, -0.01)).toThrow(/^blankLossG must be >= 0/);
  });
});

describe("cleaningCurveCorrection (ASTM G1 §7)", () => {
  it("a straight base-metal segment is extrapolated to zero cycles (derived from the formula)", () => {
    // From cycle 3 the line has slope 0.004 g/cycle: 0.066, 0.070, 0.074 → 0.066 − 3·0.004 = 0.054 g at zero cycles.
    const r = cleaningCurveCorrection([0.05, 0.062, 0.066, 0.07, 0.074], 3);
    expect(r.slopeGPerCycle).toBeCloseTo(0.004, 12);
    expect(r.correctedLossG).toBeCloseTo(0.054, 12);
  });

  it("least squares through scattered base-metal points (derived from the least-squares formulas)", () => {
    // x = 2, 3, 4; y = 0.100, 0.103, 0.105 → slope = Σdx·dy/Σdx² = 0.0025, intercept = 0.102667 − 3·0.0025 = 0.095167.
    const r = cleaningCurveCorrection([0.09, 0.1, 0.103, 0.105], 2);
    expect(r.slopeGPerCycle).toBeCloseTo(0.0025, 12);
    expect(r.correctedLossG).toBeCloseTo(0.308 / 3 - 0.0075, 12);
  });

  it("a line through the origin gives zero, not a rounding error below it (derived)", () => {
    expect(cleaningCurveCorrection([0.1, 0.2, 0.3], 1).correctedLossG).toBeGreaterThanOrEqual(0);
    expect(cleaningCurveCorrection([0.1, 0.2, 0.3], 1).correctedLossG).toBeCloseTo(0, 12);
  });

  it("invalid inputs throw RangeError naming the argument", () => {
    expect(() => cleaningCurveCorrection([0.1], 1)).toThrow(/^cumulativeLossG must have at least 2 cycles/);
    expect(() => cleaningCurveCorrection([0.1, 0.2, 0.3], 3)).toThrow(
      /^baseMetalFromCycle must be an integer from 1 to 2/,
    );
    expect(() => cleaningCurveCorrection([0.1, 0.2, 0.3], 0)).toThrow(/^baseMetalFromCycle /);
    expect(() => cleaningCurveCorrection([0.1, 0.2, 0.3], 1.5)).toThrow(/^baseMetalFromCycle /);
    expect(() => cleaningCurveCorrection([0.1, -0.2, 0.3], 1)).toThrow(/^cumulativeLossG\[1\] must be >= 0/);
    expect(() => cleaningCurveCorrection([0.1, Number.NaN], 1)).toThrow(/^cumulativeLossG\[1\] /);
    expect(() => cleaningCurveCorrection("0.1,0.2" as never, 1)).toThrow(/^cumulativeLossG /);
  });

  it("a segment that extrapolates below zero is refused, naming cumulativeLossG", () => {
    expect(() => cleaningCurveCorrection([0.01, 0.05, 0.2, 0.35], 3)).toThrow(
      /^cumulativeLossG from cycle 3 extrapolates to a negative loss/,
    );
  });
});
