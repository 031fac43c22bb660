import { describe, it, expect } from "vitest";
import fc from "fast-check";
import { faraday, unit } from "mathjs";
import {
  K_CONSTANTS,
  MM_PER_MIL,
  MPA_PER_PSI,
  HOURS_PER_YEAR,
  FARADAY_C_PER_MOL,
  convertRate,
  mmPerYearToMpy,
  mpyToMmPerYear,
  mmToInch,
  inchToMm,
  mpaToPsi,
  psiToMpa,
  toDisplay,
  fromDisplay,
  displayValue,
  unitLabel,
  RATE_UNITS,
  UNIT_LABELS,
} from "../../../app/domain/index.ts";

/** Relative difference, for tolerances stated as a fraction. */
function relDiff(actual: number, expected: number): number {
  return Math.abs(actual - expected) / Math.abs(expected);
}

describe("constants", () => {
  it("1 mil = 0.0254 mm — exact by the definition of the inch (derived from the definition), checked with mathjs", () => {
    expect(MM_PER_MIL).toBe(0.0254);
    expect(unit(1, "mil").toNumber("mm")).toBeCloseTo(MM_PER_MIL, 12); // oracle: mathjs
  });

  it("K for mm/y is 8.76×10⁴ (ASTM G1 §8, published)", () => {
    expect(K_CONSTANTS.mmPerYear).toBe(8.76e4);
  });

  it("K for mpy: the exact path differs from the published rounded 3.45×10⁶ (ASTM G1 §8) by 0.03 % — the documented rounding", () => {
    // Tolerance 0.05 %: the published K is rounded to three figures (3.4488×10⁶ → 3.45×10⁶).
    expect(relDiff(K_CONSTANTS.mpy, 3.45e6)).toBeLessThan(5e-4);
    expect(relDiff(K_CONSTANTS.mpy, 3.45e6)).toBeGreaterThan(2e-4);
  });

  it("µm/y K 8.76×10⁷, mdd K 2.40×10⁶·D, g/(m²·h) K 1.00×10⁴·D (ASTM G1 table, from memory)", () => {
    expect(K_CONSTANTS.umPerYear).toBe(8.76e7);
    expect(K_CONSTANTS.mddTimesDensity).toBe(2.4e6);
    expect(K_CONSTANTS.gPerM2PerHourTimesDensity).toBe(1e4);
  });

  it("the year basis is 8760 h (ASTM G1, published)", () => {
    expect(HOURS_PER_YEAR).toBe(8760);
  });

  it("Faraday constant equals mathjs's value (exact since the 2019 SI redefinition)", () => {
    expect(relDiff(FARADAY_C_PER_MOL, faraday.toNumber("C/mol"))).toBeLessThan(1e-12); // oracle: mathjs
  });

  it("1 psi = 6894.757 Pa (derived from the exact inch and pound-force), checked with mathjs", () => {
    expect(relDiff(MPA_PER_PSI, unit(1, "psi").toNumber("MPa"))).toBeLessThan(1e-9); // oracle: mathjs
  });
});

describe("rate conversions", () => {
  it("1 mpy = 0.0254 mm/y and 1 mm/y = 39.370 mpy (derived from the definition), mathjs mil/year oracle", () => {
    expect(mpyToMmPerYear(1)).toBe(0.0254);
    expect(mmPerYearToMpy(1)).toBeCloseTo(39.37007874, 8);
    const oracle = unit(1, "mm/year").toNumber("mil/year"); // oracle: mathjs
    expect(relDiff(mmPerYearToMpy(1), oracle)).toBeLessThan(1e-12);
  });

  it("1 mm/y = 1000 µm/y and 1/25.4 in/y (derived from the definitions)", () => {
    expect(convertRate(1, "mm/y", "um/y")).toBe(1000);
    expect(convertRate(25.4, "mm/y", "ipy")).toBeCloseTo(1, 12);
  });

  it("mm/y = 0.0365 × mdd / D and mpy = 1.437 × mdd / D on the 365-day year (derived from the formula)", () => {
    // 1 mdd = 1e-5 g/(cm²·d); ÷ D → cm/d; × 10 mm/cm × 365 d/y.
    expect(convertRate(1, "mdd", "mm/y", 7.86)).toBeCloseTo(0.0365 / 7.86, 12);
    expect(convertRate(1, "mdd", "mpy", 7.86)).toBeCloseTo(0.0365 / 0.0254 / 7.86, 12);
  });

  it("mm/y = 8.76 × g/(m²·h) / D (derived from the formula)", () => {
    expect(convertRate(1, "g/m2/h", "mm/y", 2.7)).toBeCloseTo(8.76 / 2.7, 12);
  });

  it("mass-based units need a density: RangeError naming densityGcm3", () => {
    expect(() => convertRate(1, "mm/y", "mdd")).toThrow(RangeError);
    expect(() => convertRate(1, "mm/y", "mdd")).toThrow(/^densityGcm3 /);
    expect(() => convertRate(1, "mm/y", "g/m2/h", -2)).toThrow(/^densityGcm3 must be > 0 \(got -2\)/);
  });

  it("unknown units and non-finite values throw RangeError naming the argument", () => {
    expect(() => convertRate(1, "furlongs" as never, "mm/y")).toThrow(/^from /);
    expect(() => convertRate(1, "mm/y", "mph" as never)).toThrow(/^to /);
    expect(() => convertRate(Number.NaN, "mm/y", "mpy")).toThrow(/^value /);
  });

  it("every pair of rate units round-trips (property)", () => {
    fc.assert(
      fc.property(
        fc.double({ min: 1e-6, max: 1e4, noNaN: true }),
        fc.constantFrom(...RATE_UNITS),
        fc.constantFrom(...RATE_UNITS),
        fc.double({ min: 0.5, max: 25, noNaN: true }),
        (value, from, to, density) => {
          const back = convertRate(convertRate(value, from, to, density), to, from, density);
          expect(relDiff(back, value)).toBeLessThan(1e-12);
        },
      ),
    );
  });

  it("mm/y ↔ mpy agrees with mathjs at any rate (property, oracle: mathjs)", () => {
    fc.assert(
      fc.property(fc.double({ min: 1e-6, max: 1e3, noNaN: true }), (mmPerYear) => {
        const oracle = unit(mmPerYear, "mm/year").toNumber("mil/year");
        expect(relDiff(mmPerYearToMpy(mmPerYear), oracle)).toBeLessThan(1e-12);
      }),
    );
  });
});

describe("length and pressure conversions", () => {
  it("1 in = 25.4 mm (exact, international inch) and 1 MPa = 145.04 psi (mathjs oracle)", () => {
    expect(inchToMm(1)).toBe(25.4);
    expect(mmToInch(25.4)).toBe(1);
    expect(relDiff(mpaToPsi(1), unit(1, "MPa").toNumber("psi"))).toBeLessThan(1e-9); // oracle: mathjs
    expect(relDiff(psiToMpa(1000), unit(1000, "psi").toNumber("MPa"))).toBeLessThan(1e-9); // oracle: mathjs
  });

  it("mm ↔ in and MPa ↔ psi round-trip (property)", () => {
    fc.assert(
      fc.property(fc.double({ min: 1e-6, max: 1e5, noNaN: true }), (x) => {
        expect(relDiff(inchToMm(mmToInch(x)), x)).toBeLessThan(1e-13);
        expect(relDiff(psiToMpa(mpaToPsi(x)), x)).toBeLessThan(1e-13);
      }),
    );
  });
});

describe("display helpers", () => {
  it("unit labels per system (SI: mm/y, mm, MPa; US customary: mpy, in, psi)", () => {
    expect(UNIT_LABELS.SI).toEqual({ rate: "mm/y", thickness: "mm", pressure: "MPa" });
    expect(UNIT_LABELS.US).toEqual({ rate: "mpy", thickness: "in", pressure: "psi" });
    expect(unitLabel("rate", "US")).toBe("mpy");
    expect(unitLabel("thickness", "SI")).toBe("mm");
  });

  it("SI values pass through; US values convert (derived from the definitions)", () => {
    expect(toDisplay("rate", 0.254, "SI")).toBe(0.254);
    expect(toDisplay("rate", 0.254, "US")).toBeCloseTo(10, 12);
    expect(toDisplay("thickness", 12.7, "US")).toBeCloseTo(0.5, 12);
    expect(toDisplay("pressure", psiToMpa(150), "US")).toBeCloseTo(150, 9);
    expect(displayValue("rate", 0.0254, "US")).toEqual({ value: 1, unit: "mpy" });
  });

  it("fromDisplay inverts toDisplay for every quantity and system (property)", () => {
    fc.assert(
      fc.property(
        fc.constantFrom("rate" as const, "thickness" as const, "pressure" as const),
        fc.constantFrom("SI" as const, "US" as const),
        fc.double({ min: 1e-6, max: 1e5, noNaN: true }),
        (quantity, system, value) => {
          const back = fromDisplay(quantity, toDisplay(quantity, value, system), system);
          expect(relDiff(back, value)).toBeLessThan(1e-13);
        },
      ),
    );
  });

  it("an unknown system or quantity throws RangeError naming it", () => {
    expect(() => toDisplay("rate", 1, "metric" as never)).toThrow(/^system /);
    expect(() => toDisplay("speed" as never, 1, "US")).toThrow(/^quantity /);
    expect(() => toDisplay("speed" as never, 1, "SI")).toThrow(/^quantity /);
    expect(() => fromDisplay("rate", Number.POSITIVE_INFINITY, "US")).toThrow(/^displayValue /);
    expect(() => unitLabel("rate", "UK" as never)).toThrow(RangeError);
  });
});
