import { describe, it, expect } from "vitest";
import {
  MATERIALS,
  findMaterial,
  materialEquivalentWeight,
  equivalentWeight,
  Y_MATERIAL_GROUPS,
} from "../../../app/domain/index.ts";

function relDiff(actual: number, expected: number): number {
  return Math.abs(actual - expected) / Math.abs(expected);
}

describe("materials table", () => {
  // The densities are ASTM G1 Appendix X1 values recalled from memory (references.md marks them
  // [mem]); restating them would only copy the table. Their shape and labels are tested instead.
  it("every density is within 2–12 g/cm³, the span of engineering metals from aluminium to lead (common practice)", () => {
    for (const m of MATERIALS) {
      expect(m.densityGcm3, m.key).toBeGreaterThanOrEqual(2);
      expect(m.densityGcm3, m.key).toBeLessThanOrEqual(12);
    }
  });

  it("every material names its density source, tagged from memory until checked against a licensed copy", () => {
    for (const m of MATERIALS) {
      expect(m.densitySource.length, m.key).toBeGreaterThan(0);
      expect(m.densitySource, m.key).toMatch(/ASTM G1/);
      expect(m.densityTag, m.key).toBe("mem");
    }
  });

  it("every record is complete: unique key and UNS, composition ≤ 100 %, a B31.3 Y group", () => {
    const keys = new Set(MATERIALS.map((m) => m.key));
    expect(keys.size).toBe(MATERIALS.length);
    const uns = MATERIALS.map((m) => m.uns).filter((u) => u !== null);
    expect(new Set(uns).size).toBe(uns.length);
    for (const m of MATERIALS) {
      const total = Object.values(m.composition).reduce((a, b) => a + b, 0);
      expect(total, m.key).toBeLessThanOrEqual(100.0001);
      expect(total, m.key).toBeGreaterThan(99.9);
      expect(Y_MATERIAL_GROUPS).toContain(m.yMaterialGroup);
      expect(m.name.length).toBeGreaterThan(0);
    }
  });

  it("look-up by UNS number is case-insensitive; unknown materials throw RangeError", () => {
    expect(findMaterial("s31600").key).toBe("ss-316");
    expect(findMaterial("G10180").key).toBe("carbon-steel");
    expect(() => findMaterial("unobtainium")).toThrow(/^keyOrUns must be a material key or UNS number/);
  });

  it("the table cannot be changed in place", () => {
    const m = findMaterial("carbon-steel");
    expect(Object.isFrozen(m)).toBe(true);
    expect(Object.isFrozen(m.composition)).toBe(true);
    expect(Object.isFrozen(MATERIALS)).toBe(true);
  });

  it("equivalent weights from the nominal compositions: carbon steel 27.92, 304 25.12, 316 25.50 (ASTM G102 table, from memory)", () => {
    expect(relDiff(materialEquivalentWeight("carbon-steel"), 27.92)).toBeLessThan(2e-3);
    expect(relDiff(materialEquivalentWeight("ss-304"), 25.12)).toBeLessThan(2e-3);
    expect(relDiff(materialEquivalentWeight("ss-316"), 25.5)).toBeLessThan(2e-3);
  });

  it("every material's equivalent weight lies between the smallest and largest W/n of its elements (derived: 1/Σ(n·f/W) is a weighted harmonic mean)", () => {
    for (const m of MATERIALS) {
      const ew = materialEquivalentWeight(m.key);
      const perElement = Object.keys(m.composition).map((el) => equivalentWeight({ [el]: 100 }));
      expect(ew, m.key).toBeGreaterThanOrEqual(Math.min(...perElement) * (1 - 1e-12));
      expect(ew, m.key).toBeLessThanOrEqual(Math.max(...perElement) * (1 + 1e-12));
    }
  });
});
