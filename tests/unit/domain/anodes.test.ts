import { describe, it, expect } from "vitest";
import fc from "fast-check";
import { sacrificialAnodeLife } from "../../../app/domain/index.ts";

function relDiff(actual: number, expected: number): number {
  return Math.abs(actual - expected) / Math.abs(expected);
}

describe("sacrificialAnodeLife (DNV-RP-B401 style, from memory)", () => {
  it("T = m·C·u / (I·8760): 100 kg Al-Zn-In at 2000 A·h/kg, u 0.9, 1 A → 20.55 years (derived from the formula)", () => {
    expect(
      sacrificialAnodeLife({ massKg: 100, capacityAhPerKg: 2000, utilizationFactor: 0.9, currentA: 1 }),
    ).toBeCloseTo(180000 / 8760, 12);
  });

  it("is linear in mass and inverse in current (property)", () => {
    fc.assert(
      fc.property(
        fc.double({ min: 1, max: 1000, noNaN: true }),
        fc.double({ min: 0.01, max: 100, noNaN: true }),
        (m, I) => {
          const base = sacrificialAnodeLife({ massKg: m, capacityAhPerKg: 780, utilizationFactor: 0.85, currentA: I });
          expect(
            relDiff(
              sacrificialAnodeLife({ massKg: 2 * m, capacityAhPerKg: 780, utilizationFactor: 0.85, currentA: I }),
              2 * base,
            ),
          ).toBeLessThan(1e-12);
          expect(
            relDiff(
              sacrificialAnodeLife({ massKg: m, capacityAhPerKg: 780, utilizationFactor: 0.85, currentA: 2 * I }),
              base / 2,
            ),
          ).toBeLessThan(1e-12);
        },
      ),
    );
  });

  it.each([
    [{ massKg: 0, capacityAhPerKg: 2000, utilizationFactor: 0.9, currentA: 1 }, /^massKg must be > 0/],
    [{ massKg: 10, capacityAhPerKg: -1, utilizationFactor: 0.9, currentA: 1 }, /^capacityAhPerKg must be > 0/],
    [
      { massKg: 10, capacityAhPerKg: 2000, utilizationFactor: 1.1, currentA: 1 },
      /^utilizationFactor must be > 0 and <= 1/,
    ],
    [{ massKg: 10, capacityAhPerKg: 2000, utilizationFactor: 0.9, currentA: 0 }, /^currentA must be > 0/],
  ])("invalid %o throws RangeError", (input, message) => {
    expect(() => sacrificialAnodeLife(input)).toThrow(RangeError);
    expect(() => sacrificialAnodeLife(input)).toThrow(message);
  });
});
