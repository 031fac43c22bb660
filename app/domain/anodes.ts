/**
 * Sacrificial anodes: design life from anode mass and current output.
 *
 * Standards: DNV-RP-B401 style anode life, T = m·C·u / (I·8760) in years
 * [mem]; typical electrochemical capacities and utilisation factors [mem].
 * (NACE SP0169 protection criteria, −850 mV vs CSE or 100 mV polarisation
 * [pub], are judged on survey data, not computed here.)
 */

import { HOURS_PER_YEAR } from "./units.ts";
import { requireInHalfOpen, requireObject, requirePositive } from "./validate.ts";

export interface AnodeLifeInput {
  /** Net anode mass, kg. */
  massKg: number;
  /** Electrochemical capacity of the anode alloy, A·h/kg. */
  capacityAhPerKg: number;
  /** Fraction of the mass that can be consumed before the anode stops working, (0, 1]. */
  utilizationFactor: number;
  /** Mean current output, A. */
  currentA: number;
}

/** Anode life in years on the 8760-hour year: m·C·u / (I·8760). */
export function sacrificialAnodeLife(input: AnodeLifeInput): number {
  requireObject("input", input);
  const m = requirePositive("massKg", input.massKg);
  const C = requirePositive("capacityAhPerKg", input.capacityAhPerKg);
  const u = requireInHalfOpen("utilizationFactor", input.utilizationFactor, 0, 1);
  const I = requirePositive("currentA", input.currentA);
  return (m * C * u) / (I * HOURS_PER_YEAR);
}

/**
 * Typical design capacities of anode alloys, A·h/kg [mem]. For screens that
 * offer a starting value; the anode supplier's certified figure governs.
 */
export const TYPICAL_ANODE_CAPACITY_AH_PER_KG: Readonly<Record<string, { value: number; source: string }>> = {
  "Al-Zn-In": { value: 2000, source: "DNV-RP-B401 style design value, seawater [mem]" },
  Zn: { value: 780, source: "DNV-RP-B401 style design value, seawater [mem]" },
};

/** Typical utilisation factors by anode type, 0.75–0.90 (DNV-RP-B401, from memory [mem]). */
export const TYPICAL_UTILIZATION_FACTOR = {
  min: 0.75,
  max: 0.9,
  source: "DNV-RP-B401 range by anode type, 0.75–0.90 [mem]",
} as const;
