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
  // ASTM G1 Appendix X1 densities, g/cm³ — from memory (the reference sheet marks them [mem]).
  it.each([
    ["carbon-steel", 7.86],
    ["ss-304", 7.94],
    ["ss-304l", 7.94],
    ["ss-316", 7.98],
    ["ss-316l", 7.98],
    ["copper", 8.94],
    ["admiralty-brass", 8.52],
    ["cu-ni-90-10", 8.94],
    ["al-6061", 2.7],
    ["titanium-gr2", 4.51],
    ["zinc", 7.13],
    ["lead", 11.35],
    ["nickel-200", 8.89],
    ["alloy-625", 8.44],
    ["alloy-c276", 8.89],
  ])("%s density is %s g/cm³ (ASTM G1 appendix, from memory)", (key, density) => {
    const m = findMaterial(key);
    expect(m.densityGcm3).toBe(density);
    expect(m.densityTag).toBe("mem");
    expect(m.densitySource).toMatch(/ASTM G1/);
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

  it("every material has a computable equivalent weight that equals equivalentWeight of its composition", () => {
    for (const m of MATERIALS) {
      const ew = materialEquivalentWeight(m.key);
      expect(ew, m.key).toBeGreaterThan(5);
      expect(ew).toBe(equivalentWeight({ ...m.composition }));
    }
  });
});
