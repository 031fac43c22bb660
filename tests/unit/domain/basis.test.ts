import { describe, it, expect } from "vitest";
import { calculationBasis, findMaterial, FORMULA_VERSION } from "../../../app/domain/index.ts";

describe("calculationBasis", () => {
  it("records formula version, unit basis, both year bases, the exact mpy path and the constants", () => {
    const b = calculationBasis();
    expect(b.formulaVersion).toBe(FORMULA_VERSION);
    expect(b.unitBasis).toMatchObject({
      length: "mm",
      mass: "g",
      area: "cm²",
      time: "h",
      density: "g/cm³",
      pressure: "MPa",
    });
    expect(b.yearBasis.ratesHoursPerYear).toBe(8760); // ASTM G1, published
    expect(b.yearBasis.thicknessDaysPerYear).toBe(365.25);
    expect(b.mmPerYearToMpy).toMatchObject({ path: "exact", divisorMmPerMil: 0.0254 });
    expect(b.constants.kMmPerYear).toBe(8.76e4); // ASTM G1 §8, published
    expect(b.constants.kMpyPublishedRounded).toBe(3.45e6); // ASTM G1 §8, published
    expect(b.density).toBeNull();
    expect(b.standards).toContain("API 570");
  });

  it("carries the density and its source when given, and survives a JSON round trip", () => {
    const b = calculationBasis({ densityGcm3: 7.86, source: findMaterial("carbon-steel").densitySource });
    expect(b.density).toEqual({ densityGcm3: 7.86, source: findMaterial("carbon-steel").densitySource });
    expect(JSON.parse(JSON.stringify(b))).toEqual(b);
  });

  it("rejects a density without a source, or an impossible density", () => {
    expect(() => calculationBasis({ densityGcm3: 7.86, source: " " })).toThrow(
      /^source must be a non-empty description/,
    );
    expect(() => calculationBasis({ densityGcm3: 0, source: "lab" })).toThrow(/^densityGcm3 must be > 0/);
  });
});
