import { describe, it, expect } from "vitest";
import fc from "fast-check";
import {
  severity,
  severityBand,
  worseSeverity,
  SEVERITY_LEVELS,
  validateThresholds,
} from "../../../app/domain/index.ts";

/** mpy → mm/y by the exact definition 1 mil = 0.0254 mm. */
const mm = (mpy: number) => mpy * 0.0254;

describe("severity — NACE SP0775 general corrosion (mpy edges published)", () => {
  it.each([
    [0, "low"],
    [0.99, "low"],
    [1, "moderate"], // lower edge of moderate: 1 mpy
    [4.9, "moderate"],
    [4.99, "moderate"], // the gap 4.9 | 5 belongs to moderate (edge rule: moderate 1 to < 5)
    [5, "high"],
    [10, "high"], // upper edge of high is inclusive: 5–10
    [10.01, "severe"],
    [50, "severe"],
  ] as const)("%s mpy is %s", (mpy, expected) => {
    expect(severity("general", mm(mpy))).toBe(expected);
  });

  it("the mm/y edges of the table, 0.025 | 0.12 | 0.13 | 0.25, fall as the mpy rule says (derived from the exact conversion)", () => {
    expect(severity("general", 0.025)).toBe("low"); // 0.984 mpy
    expect(severity("general", 0.12)).toBe("moderate"); // 4.72 mpy
    expect(severity("general", 0.125)).toBe("moderate"); // 4.92 mpy, inside the table's gap
    expect(severity("general", 0.127)).toBe("high"); // exactly 5 mpy
    expect(severity("general", 0.254)).toBe("high"); // exactly 10 mpy
    expect(severity("general", 0.255)).toBe("severe");
  });
});

describe("severity — NACE SP0775 pitting (mpy edges from memory)", () => {
  it.each([
    [0, "low"],
    [4.99, "low"],
    [5, "moderate"],
    [7.9, "moderate"],
    [7.99, "moderate"],
    [8, "high"],
    [15, "high"],
    [15.01, "severe"],
  ] as const)("%s mpy is %s", (mpy, expected) => {
    expect(severity("pitting", mm(mpy))).toBe(expected);
  });

  it("0.381 mm/y (exactly 15 mpy) is high, 0.2032 mm/y (exactly 8 mpy) is high (derived from the exact conversion)", () => {
    expect(severity("pitting", 0.381)).toBe("high");
    expect(severity("pitting", 0.2032)).toBe("high");
    expect(severity("pitting", 0.127)).toBe("moderate");
  });
});

describe("severity — owner thresholds in mm/y", () => {
  const t = { moderate: 0.05, high: 0.1, severe: 0.2 };
  it.each([
    [0.049, "low"],
    [0.05, "moderate"], // moderate from `moderate`
    [0.099, "moderate"],
    [0.1, "high"], // high from `high`
    [0.2, "high"], // severe only above `severe`
    [0.2001, "severe"],
  ] as const)("%s mm/y is %s (issue rule)", (rate, expected) => {
    expect(severity("general", rate, t)).toBe(expected);
    expect(severity("pitting", rate, t)).toBe(expected);
  });

  it("invalid thresholds throw RangeError naming the threshold", () => {
    expect(() => severity("general", 0.1, { moderate: 0, high: 0.1, severe: 0.2 })).toThrow(
      /^thresholds.moderate must be > 0/,
    );
    expect(() => severity("general", 0.1, { moderate: 0.1, high: 0.1, severe: 0.2 })).toThrow(
      /^thresholds.high must be > thresholds.moderate/,
    );
    expect(() => severity("general", 0.1, { moderate: 0.05, high: 0.1, severe: 0.09 })).toThrow(
      /^thresholds.severe must be >= thresholds.high/,
    );
    expect(() => severity("general", 0.1, { moderate: 0.05, high: Number.NaN, severe: 0.2 })).toThrow(
      /^thresholds.high /,
    );
    expect(() => validateThresholds(null)).toThrow(/^thresholds must be an object/);
  });
});

describe("severity — invalid inputs", () => {
  it("a negative or non-finite rate throws RangeError naming mmPerYear", () => {
    expect(() => severity("general", -0.01)).toThrow(/^mmPerYear must be >= 0 \(got -0.01\)/);
    expect(() => severity("pitting", Number.NaN)).toThrow(/^mmPerYear /);
    expect(() => severity("pitting", Number.POSITIVE_INFINITY)).toThrow(/^mmPerYear /);
  });

  it("an unknown kind throws RangeError naming kind", () => {
    expect(() => severity("crevice" as never, 0.1)).toThrow(/^kind must be one of "general", "pitting"/);
  });
});

describe("severity — invariants (property)", () => {
  it("is monotone in the rate for both kinds", () => {
    fc.assert(
      fc.property(
        fc.constantFrom("general" as const, "pitting" as const),
        fc.double({ min: 0, max: 2, noNaN: true }),
        fc.double({ min: 0, max: 2, noNaN: true }),
        (kind, a, b) => {
          const [lo, hi] = a <= b ? [a, b] : [b, a];
          expect(SEVERITY_LEVELS.indexOf(severity(kind, lo))).toBeLessThanOrEqual(
            SEVERITY_LEVELS.indexOf(severity(kind, hi)),
          );
        },
      ),
    );
  });

  it("worseSeverity picks the higher category and is symmetric", () => {
    expect(worseSeverity("low", "high")).toBe("high");
    expect(worseSeverity("severe", "moderate")).toBe("severe");
    fc.assert(
      fc.property(fc.constantFrom(...SEVERITY_LEVELS), fc.constantFrom(...SEVERITY_LEVELS), (a, b) => {
        expect(worseSeverity(a, b)).toBe(worseSeverity(b, a));
      }),
    );
    expect(() => worseSeverity("bad" as never, "low")).toThrow(/^a /);
  });
});

describe("severityBand — what a category covers", () => {
  it("gives the NACE SP0775 general bands as the exact mm/y conversions of 1 | 5 | 10 mpy (published edges)", () => {
    const severe = severityBand("general", "severe");
    expect(severe).toMatchObject({ lower: expect.closeTo(0.254, 12), lowerIncluded: false, upper: null });
    const high = severityBand("general", "high");
    expect(high.lower).toBeCloseTo(0.127, 12);
    expect(high.upper).toBeCloseTo(0.254, 12);
    expect([high.lowerIncluded, high.upperIncluded]).toEqual([true, true]);
    expect(severityBand("general", "moderate")).toMatchObject({
      lower: expect.closeTo(0.0254, 12),
      lowerIncluded: true,
      upper: expect.closeTo(0.127, 12),
      upperIncluded: false,
    });
    expect(severityBand("general", "low")).toMatchObject({ lower: null, upper: expect.closeTo(0.0254, 12) });
  });

  it("gives the pitting bands from 5 | 8 | 15 mpy (edges from memory)", () => {
    expect(severityBand("pitting", "severe").lower).toBeCloseTo(0.381, 12);
    expect(severityBand("pitting", "high").lower).toBeCloseTo(0.2032, 12);
  });

  it("agrees with severity() at and beside every edge, default and owner bands", () => {
    const owner = { moderate: 0.05, high: 0.1, severe: 0.2 };
    for (const kind of ["general", "pitting"] as const) {
      for (const t of [undefined, owner]) {
        for (const category of SEVERITY_LEVELS) {
          const b = severityBand(kind, category, t);
          if (b.lower !== null) {
            expect(severity(kind, b.lower, t) === category).toBe(b.lowerIncluded);
            expect(severity(kind, b.lower * 1.001, t)).toBe(category);
          }
          if (b.upper !== null) {
            expect(severity(kind, b.upper, t) === category).toBe(b.upperIncluded);
            expect(severity(kind, b.upper * 0.999, t)).toBe(category);
          }
        }
      }
    }
  });

  it("uses the owner's edges as given and refuses an unknown category", () => {
    expect(severityBand("general", "severe", { moderate: 0.05, high: 0.1, severe: 0.2 }).lower).toBe(0.2);
    expect(() => severityBand("general", "extreme" as never)).toThrow(/severity must be a severity category/);
  });
});
