import { describe, it, expect } from "vitest";
import fc from "fast-check";
import {
  studentTQuantile,
  regressionRate,
  conservativeRemainingLife,
  formatIsoDay,
  parseIsoDay,
} from "../../../app/domain/index.ts";

function relDiff(actual: number, expected: number): number {
  return Math.abs(actual - expected) / Math.abs(expected);
}

describe("Student's t quantile", () => {
  // NIST/SEMATECH e-Handbook of Statistical Methods §1.3.6.7.2, critical values of Student's t (published table, 3 decimals).
  it.each([
    [0.975, 1, 12.706],
    [0.975, 2, 4.303],
    [0.975, 3, 3.182],
    [0.975, 4, 2.776],
    [0.975, 5, 2.571],
    [0.975, 10, 2.228],
    [0.975, 20, 2.086],
    [0.975, 30, 2.042],
    [0.975, 100, 1.984],
    [0.95, 1, 6.314],
    [0.95, 10, 1.812],
    [0.995, 1, 63.657],
    [0.995, 10, 3.169],
  ])("t(%s, %s df) = %s (NIST/SEMATECH table, published)", (p, df, expected) => {
    expect(Math.abs(studentTQuantile(p, df) - expected)).toBeLessThan(6e-4);
  });

  it("matches the closed forms for 1 and 2 degrees of freedom (derived from the t densities)", () => {
    fc.assert(
      fc.property(fc.double({ min: 0.51, max: 0.999, noNaN: true }), (p) => {
        expect(relDiff(studentTQuantile(p, 1), Math.tan(Math.PI * (p - 0.5)))).toBeLessThan(1e-9);
        expect(relDiff(studentTQuantile(p, 2), (2 * p - 1) / Math.sqrt(2 * p * (1 - p)))).toBeLessThan(1e-9);
      }),
    );
  });

  it("approaches the normal 1.960 for many degrees of freedom (published normal quantile)", () => {
    expect(Math.abs(studentTQuantile(0.975, 1e6) - 1.95996)).toBeLessThan(1e-4);
  });

  it("is antisymmetric about p = 0.5 and increases with p (property; follows from the symmetric t density)", () => {
    fc.assert(
      fc.property(fc.double({ min: 0.01, max: 0.98, noNaN: true }), fc.integer({ min: 1, max: 200 }), (p, df) => {
        expect(studentTQuantile(p, df)).toBeCloseTo(-studentTQuantile(1 - p, df), 8);
        expect(studentTQuantile(p + 0.01, df)).toBeGreaterThan(studentTQuantile(p, df));
      }),
    );
  });

  it("invalid arguments throw RangeError naming them", () => {
    expect(() => studentTQuantile(1, 3)).toThrow(/^p must be > 0 and < 1/);
    expect(() => studentTQuantile(0.9, 0)).toThrow(/^df must be > 0/);
  });
});

describe("regressionRate (ordinary least squares with a Student-t interval)", () => {
  // Four surveys 1461 days (exactly 4 years of 365.25 days) apart: x = 0, 4, 8, 12 years.
  const readings = [
    { date: "2012-01-01", thicknessMm: 10 },
    { date: "2016-01-01", thicknessMm: 9.5 },
    { date: "2020-01-01", thicknessMm: 9.2 },
    { date: "2024-01-01", thicknessMm: 8.5 },
  ];

  it("slope, standard error and interval by hand (derived from the least-squares formulas)", () => {
    // Sxx = 80, Sxy = −9.6 → b = −0.12 mm/y; SSE = 1.18 − 1.152 = 0.028; s_b = √(0.014/80); t(0.975, 2) = 4.303.
    const r = regressionRate(readings);
    expect(r.mmPerYear).toBeCloseTo(0.12, 12);
    expect(r.slopeMmPerYear).toBeCloseTo(-0.12, 12);
    expect(r.standardErrorMmPerYear).toBeCloseTo(Math.sqrt(0.014 / 80), 12);
    expect(r.degreesOfFreedom).toBe(2);
    expect(Math.abs(r.tCritical - 4.303)).toBeLessThan(6e-4); // NIST/SEMATECH table, published
    expect(r.upperMmPerYear).toBeCloseTo(0.12 + r.tCritical * Math.sqrt(0.014 / 80), 12);
    expect(r.lowerMmPerYear).toBeCloseTo(0.12 - r.tCritical * Math.sqrt(0.014 / 80), 12);
    expect(r.rSquared).toBeCloseTo(1 - 0.028 / 1.18, 12);
    expect(r.fittedThicknessAtLastMm).toBeCloseTo(8.58, 12);
    expect(r.grew).toBe(false);
    expect(r.method).toMatch(/least squares/);
  });

  it("a 90 % interval is narrower than the 95 % one (derived: smaller t)", () => {
    const r90 = regressionRate(readings, { confidence: 0.9 });
    const r95 = regressionRate(readings);
    expect(r90.upperMmPerYear).toBeLessThan(r95.upperMmPerYear);
    expect(Math.abs(r90.tCritical - 2.92)).toBeLessThan(6e-4); // t(0.95, 2), NIST/SEMATECH table, published
  });

  it("a perfect straight line (0.4 mm per 4 years) gives 0.1 mm/y with a zero-width interval (derived)", () => {
    const r = regressionRate([
      { date: "2016-01-01", thicknessMm: 10 },
      { date: "2020-01-01", thicknessMm: 9.6 },
      { date: "2024-01-01", thicknessMm: 9.2 },
    ]);
    expect(r.mmPerYear).toBeCloseTo(0.1, 12);
    expect(r.upperMmPerYear - r.lowerMmPerYear).toBeLessThan(1e-9);
    expect(r.rSquared).toBeCloseTo(1, 12);
  });

  it("an apparent growth gives a loss rate of 0 with grew: true, never a negative rate", () => {
    const r = regressionRate([
      { date: "2016-01-01", thicknessMm: 9 },
      { date: "2020-01-01", thicknessMm: 9.1 },
      { date: "2024-01-01", thicknessMm: 9.3 },
    ]);
    expect(r.mmPerYear).toBe(0);
    expect(r.lowerMmPerYear).toBe(0);
    expect(r.grew).toBe(true);
    expect(r.slopeMmPerYear).toBeGreaterThan(0);
  });

  it("same-day repeat readings are accepted by the fit; unchanged thickness has R² 1", () => {
    const r = regressionRate([
      { date: "2020-01-01", thicknessMm: 9 },
      { date: "2020-01-01", thicknessMm: 9 },
      { date: "2024-01-01", thicknessMm: 9 },
    ]);
    expect(r.mmPerYear).toBe(0);
    expect(r.rSquared).toBe(1);
  });

  it("invalid inputs throw RangeError naming the field", () => {
    expect(() => regressionRate(readings.slice(0, 2))).toThrow(/^readings must have at least 3 readings/);
    expect(() => regressionRate([readings[0], readings[0], readings[0]])).toThrow(
      /^readings must span at least 2 different dates/,
    );
    expect(() => regressionRate([readings[1], readings[0], readings[2]])).toThrow(
      /^readings\[1\]\.date must not be earlier/,
    );
    expect(() => regressionRate(readings, { confidence: 1 })).toThrow(/^options.confidence must be > 0 and < 1/);
    expect(() => regressionRate([readings[0], readings[1], { date: "2024-01-01", thicknessMm: -1 }])).toThrow(
      /^readings\[2\]\.thicknessMm must be > 0/,
    );
    expect(() => regressionRate({} as never)).toThrow(/^readings must be an array/);
  });

  it("lower ≤ best ≤ upper, all ≥ 0 and finite, for any valid series (property)", () => {
    fc.assert(
      fc.property(
        fc.array(fc.tuple(fc.integer({ min: 1, max: 1500 }), fc.double({ min: 1, max: 30, noNaN: true })), {
          minLength: 3,
          maxLength: 10,
        }),
        (steps) => {
          let day = parseIsoDay("d", "2000-01-01");
          const series = steps.map(([gap, t]) => {
            day += gap;
            return { date: formatIsoDay(day), thicknessMm: t };
          });
          const r = regressionRate(series);
          expect(r.lowerMmPerYear).toBeLessThanOrEqual(r.mmPerYear);
          expect(r.mmPerYear).toBeLessThanOrEqual(r.upperMmPerYear);
          expect(r.lowerMmPerYear).toBeGreaterThanOrEqual(0);
          expect(Number.isFinite(r.upperMmPerYear)).toBe(true);
        },
      ),
    );
  });
});

describe("conservativeRemainingLife", () => {
  it("best estimate from the point rate, conservative from the upper rate (derived from remaining life = margin / rate)", () => {
    const r = conservativeRemainingLife({
      actualMm: 8.5,
      requiredMm: 6,
      regression: { mmPerYear: 0.12, upperMmPerYear: 0.18 },
    });
    expect(r.bestEstimateYears).toBeCloseTo(2.5 / 0.12, 12);
    expect(r.conservativeYears).toBeCloseTo(2.5 / 0.18, 12);
  });

  it("is never longer than the best estimate and never negative (property)", () => {
    fc.assert(
      fc.property(
        fc.double({ min: 0, max: 50, noNaN: true }),
        fc.double({ min: 0, max: 50, noNaN: true }),
        fc.double({ min: 0, max: 5, noNaN: true }),
        fc.double({ min: 0, max: 5, noNaN: true }),
        (actualMm, requiredMm, rate, extra) => {
          const r = conservativeRemainingLife({
            actualMm,
            requiredMm,
            regression: { mmPerYear: rate, upperMmPerYear: rate + extra },
          });
          expect(r.conservativeYears).toBeLessThanOrEqual(r.bestEstimateYears);
          expect(r.conservativeYears).toBeGreaterThanOrEqual(0);
        },
      ),
    );
  });

  it("an upper rate below the point rate is refused", () => {
    expect(() =>
      conservativeRemainingLife({ actualMm: 9, requiredMm: 6, regression: { mmPerYear: 0.2, upperMmPerYear: 0.1 } }),
    ).toThrow(/^regression.upperMmPerYear must be >= regression.mmPerYear/);
    expect(() => conservativeRemainingLife({ actualMm: 9, requiredMm: 6, regression: null as never })).toThrow(
      /^regression must be an object/,
    );
  });
});
