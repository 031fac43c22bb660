import { describe, it, expect } from "vitest";
import fc from "fast-check";
import { faraday, unit } from "mathjs";
import type { Unit } from "mathjs";
import { elementsObject } from "chemical-elements";
import {
  ATOMIC_WEIGHTS,
  DEFAULT_VALENCES,
  K1_MM_G_PER_UA_CM_Y,
  K2_G_CM2_PER_UA_M2_D,
  equivalentWeight,
  sternGearyB,
  corrosionCurrentDensity,
  faradayRate,
} from "../../../app/domain/index.ts";

/** mathjs types products and quotients as `Unit | number`; these always keep a unit. */
const over = (a: Unit, b: Unit): Unit => a.divide(b) as Unit;
const times = (a: Unit, b: Unit): Unit => a.multiply(b) as Unit;

function relDiff(actual: number, expected: number): number {
  return Math.abs(actual - expected) / Math.abs(expected);
}

/** Atomic mass from the independent package (computed there from isotope abundances). */
function oracleMass(symbol: string): number {
  const mass = elementsObject[symbol]?.mass;
  if (typeof mass !== "number") throw new Error(`no oracle mass for ${symbol}`);
  return mass;
}

describe("atomic weights", () => {
  it("every entry agrees with chemical-elements within 0.02 % (oracle; the package derives masses from isotope abundances, IUPAC rounds)", () => {
    for (const [symbol, weight] of Object.entries(ATOMIC_WEIGHTS)) {
      expect(relDiff(weight, oracleMass(symbol)), symbol).toBeLessThan(2e-4);
    }
  });

  it("every default valence belongs to an element of the table", () => {
    for (const symbol of Object.keys(DEFAULT_VALENCES)) expect(ATOMIC_WEIGHTS[symbol], symbol).toBeGreaterThan(0);
  });
});

describe("equivalentWeight (ASTM G102)", () => {
  it("pure iron, Fe²⁺: EW = 55.845/2 = 27.92 (derived from the formula; ASTM G102 lists 27.92, from memory)", () => {
    expect(equivalentWeight({ Fe: 100 })).toBeCloseTo(27.9225, 4);
  });

  it("type 304 with mid-range Cr 19, Ni 9.25, Fe balance gives 25.12 (ASTM G102 table value, from memory)", () => {
    expect(relDiff(equivalentWeight({ Fe: 71.75, Cr: 19, Ni: 9.25 }), 25.12)).toBeLessThan(2e-3);
  });

  it("type 316 with Cr 17, Ni 12, Mo 2.5, Fe balance gives 25.50 (ASTM G102 table value, from memory)", () => {
    expect(relDiff(equivalentWeight({ Fe: 68.5, Cr: 17, Ni: 12, Mo: 2.5 }), 25.5)).toBeLessThan(2e-3);
  });

  it("cross-check with chemical-elements atomic masses: 1/Σ(n·f/W) for a Ni–Cr–Mo–Fe alloy (oracle)", () => {
    const composition = { Ni: 59, Cr: 21, Mo: 16, Fe: 4 };
    const expected =
      1 /
      ((2 * 0.59) / oracleMass("Ni") +
        (3 * 0.21) / oracleMass("Cr") +
        (3 * 0.16) / oracleMass("Mo") +
        (2 * 0.04) / oracleMass("Fe"));
    expect(relDiff(equivalentWeight(composition), expected)).toBeLessThan(2e-4);
  });

  it("explicit valences override the defaults: Fe³⁺ gives 55.845/3 (derived from the formula)", () => {
    expect(equivalentWeight({ Fe: 100 }, { Fe: 3 })).toBeCloseTo(55.845 / 3, 10);
  });

  it("uses exactly the elements given, with no renormalising (issue rule)", () => {
    // Fe at 99.5 % alone: Σ = 2·0.995/55.845 → EW = 55.845 / 1.99 = 28.0628 (derived), not the pure-iron 27.9225.
    expect(equivalentWeight({ Fe: 99.5 })).toBeCloseTo(55.845 / 1.99, 10);
  });

  it("refuses compositions that total below 99 % (the base element must take the balance)", () => {
    expect(() => equivalentWeight({ Fe: 50 })).toThrow(/^massPercentBySymbol must be a composition totalling >= 99 %/);
    expect(() => equivalentWeight({ Fe: 70, Cr: 18, Ni: 10.9 })).toThrow(/totalling >= 99 %/);
    expect(() => equivalentWeight({ Fe: 71, Cr: 18, Ni: 10 })).not.toThrow();
  });

  it("matches chemical-elements for any two-element alloy with default valences (property, oracle)", () => {
    const symbols = ["Fe", "Cr", "Ni", "Cu", "Zn", "Al", "Mg", "Mo", "Ti", "Mn"];
    fc.assert(
      fc.property(
        fc.constantFrom(...symbols),
        fc.constantFrom(...symbols),
        fc.double({ min: 1, max: 99, noNaN: true }),
        (a, b, percentA) => {
          fc.pre(a !== b);
          const composition = { [a]: percentA, [b]: 100 - percentA };
          const expected =
            1 /
            ((DEFAULT_VALENCES[a] * percentA) / 100 / oracleMass(a) +
              (DEFAULT_VALENCES[b] * (100 - percentA)) / 100 / oracleMass(b));
          expect(relDiff(equivalentWeight(composition), expected)).toBeLessThan(2e-4);
        },
      ),
    );
  });

  it("invalid compositions throw RangeError naming the element", () => {
    expect(() => equivalentWeight({})).toThrow(/^massPercentBySymbol must be a composition with at least one element/);
    expect(() => equivalentWeight({ Xx: 100 })).toThrow(/^massPercentBySymbol.Xx must be an element symbol/);
    expect(() => equivalentWeight({ Fe: -5 })).toThrow(/^massPercentBySymbol.Fe must be >= 0 and <= 100/);
    expect(() => equivalentWeight({ Fe: 120 })).toThrow(/^massPercentBySymbol.Fe /);
    expect(() => equivalentWeight({ Fe: 80, Cr: 30 })).toThrow(
      /^massPercentBySymbol must be a composition totalling <= 100 %/,
    );
    expect(() => equivalentWeight({ Fe: 0 })).toThrow(/^massPercentBySymbol must be a composition totalling >= 99 %/);
    expect(() => equivalentWeight({ Fe: 99, C: 1 })).toThrow(/^valenceBySymbol.C must be given/);
    expect(() => equivalentWeight({ Fe: 100 }, { Fe: 0 })).toThrow(
      /^valenceBySymbol.Fe must be an integer from 1 to 8/,
    );
    expect(() => equivalentWeight({ Fe: 100 }, { Fe: 2.5 })).toThrow(/^valenceBySymbol.Fe /);
    expect(() => equivalentWeight(null as never)).toThrow(/^massPercentBySymbol must be an object/);
  });
});

describe("sternGearyB", () => {
  it("βa = βc = 120 mV/decade gives B = 120/(2·ln10) = 26.06 mV (derived; the textbook ≈ 26 mV, from memory)", () => {
    expect(sternGearyB(120, 120)).toBeCloseTo(120 / (2 * Math.LN10), 12);
    expect(relDiff(sternGearyB(120, 120), 26.06)).toBeLessThan(1e-3);
  });

  it("agrees with the printed 2.303 form within 0.02 % (ASTM G59/G102 form, from memory)", () => {
    expect(relDiff(sternGearyB(60, 120), (60 * 120) / (2.303 * 180))).toBeLessThan(2e-4);
  });

  it("an infinite cathodic slope gives βa/ln10, and symmetrically (derived from the limit)", () => {
    expect(sternGearyB(100, Number.POSITIVE_INFINITY)).toBeCloseTo(100 / Math.LN10, 12);
    expect(sternGearyB(Number.POSITIVE_INFINITY, 100)).toBeCloseTo(100 / Math.LN10, 12);
  });

  it("invalid slopes throw RangeError naming the slope", () => {
    expect(() => sternGearyB(0, 120)).toThrow(/^betaAnodicMvPerDecade must be > 0/);
    expect(() => sternGearyB(120, -5)).toThrow(/^betaCathodicMvPerDecade must be > 0/);
    expect(() => sternGearyB(Number.NaN, 120)).toThrow(/^betaAnodicMvPerDecade /);
    expect(() => sternGearyB(Number.POSITIVE_INFINITY, Number.POSITIVE_INFINITY)).toThrow(
      /^betaAnodicMvPerDecade must be finite/,
    );
  });
});

describe("corrosionCurrentDensity (ASTM G59)", () => {
  it("B = 26 mV over Rp = 1000 Ω·cm² is 26 µA/cm² (derived from i = B/Rp with unit conversion)", () => {
    expect(corrosionCurrentDensity({ bMv: 26, polarizationResistanceOhmCm2: 1000 })).toBeCloseTo(26, 12);
  });

  it("agrees with a mathjs unit computation (oracle: mathjs)", () => {
    const i = over(unit(26, "mV"), unit(1000, "ohm cm^2"));
    expect(
      relDiff(corrosionCurrentDensity({ bMv: 26, polarizationResistanceOhmCm2: 1000 }), i.toNumber("uA/cm^2")),
    ).toBeLessThan(1e-12);
  });

  it("invalid inputs throw RangeError naming the field", () => {
    expect(() => corrosionCurrentDensity({ bMv: 0, polarizationResistanceOhmCm2: 1000 })).toThrow(/^bMv must be > 0/);
    expect(() => corrosionCurrentDensity({ bMv: 26, polarizationResistanceOhmCm2: 0 })).toThrow(
      /^polarizationResistanceOhmCm2 must be > 0/,
    );
  });
});

describe("faradayRate (ASTM G102)", () => {
  it("K₁ = 3.27×10⁻³ and K₂ = 8.954×10⁻³ (ASTM G102 constants, from memory) follow from F and the 8760-hour year", () => {
    expect(relDiff(K1_MM_G_PER_UA_CM_Y, 3.27e-3)).toBeLessThan(1e-3);
    expect(relDiff(K2_G_CM2_PER_UA_M2_D, 8.954e-3)).toBeLessThan(1e-4);
  });

  it("agrees with a mathjs computation from its Faraday constant: i·EW/(F·ρ) over 8760 h (oracle: mathjs)", () => {
    const i = 10; // µA/cm²
    const ew = 27.92;
    const rho = 7.86;
    const massRate = over(times(unit(i * 1e-6, "A/cm^2"), unit(ew, "g/mol")), faraday);
    const penetration = over(massRate, unit(rho, "g/cm^3"));
    const expectedMmPerYear = penetration.toNumber("mm/h") * 8760;
    const r = faradayRate({ currentDensityUAcm2: i, equivalentWeight: ew, densityGcm3: rho });
    expect(relDiff(r.mmPerYear, expectedMmPerYear)).toBeLessThan(1e-10);
    expect(relDiff(r.gPerM2PerDay, massRate.toNumber("g/m^2/day"))).toBeLessThan(1e-10);
    expect(r.mpy).toBeCloseTo(r.mmPerYear / 0.0254, 12);
  });

  it("1 µA/cm² on iron is about 0.46 mpy, 0.0116 mm/y (textbook rule of thumb, from memory)", () => {
    const r = faradayRate({ currentDensityUAcm2: 1, equivalentWeight: 27.92, densityGcm3: 7.87 });
    expect(relDiff(r.mpy, 0.46)).toBeLessThan(0.01);
    expect(relDiff(r.mmPerYear, 0.0116)).toBeLessThan(0.01);
  });

  it("zero current gives zero rates", () => {
    expect(faradayRate({ currentDensityUAcm2: 0, equivalentWeight: 27.92, densityGcm3: 7.86 })).toEqual({
      mmPerYear: 0,
      mpy: 0,
      gPerM2PerDay: 0,
    });
  });

  it("is linear in current density (property)", () => {
    fc.assert(
      fc.property(
        fc.double({ min: 1e-3, max: 1e4, noNaN: true }),
        fc.double({ min: 0.1, max: 10, noNaN: true }),
        (i, k) => {
          const a = faradayRate({ currentDensityUAcm2: i, equivalentWeight: 25, densityGcm3: 7.9 }).mmPerYear;
          const b = faradayRate({ currentDensityUAcm2: k * i, equivalentWeight: 25, densityGcm3: 7.9 }).mmPerYear;
          expect(relDiff(b, k * a)).toBeLessThan(1e-12);
        },
      ),
    );
  });

  it("invalid inputs throw RangeError naming the field", () => {
    expect(() => faradayRate({ currentDensityUAcm2: -1, equivalentWeight: 27.92, densityGcm3: 7.86 })).toThrow(
      /^currentDensityUAcm2 must be >= 0/,
    );
    expect(() => faradayRate({ currentDensityUAcm2: 1, equivalentWeight: 0, densityGcm3: 7.86 })).toThrow(
      /^equivalentWeight must be > 0/,
    );
    expect(() => faradayRate({ currentDensityUAcm2: 1, equivalentWeight: 27.92, densityGcm3: 0 })).toThrow(
      /^densityGcm3 must be > 0/,
    );
  });
});
