import { displayValue, type DisplayQuantity } from "../domain/index.ts";
import type { Units } from "../context";

const system = (units: Units) => (units === "us" ? "US" : "SI");

/** Digits by quantity and unit: rates to 3 decimals in mm/y, 2 in mpy; thickness 2 mm / 3 in. */
function digits(quantity: DisplayQuantity, units: Units) {
  if (quantity === "rate") return units === "us" ? 2 : 3;
  if (quantity === "thickness") return units === "us" ? 3 : 2;
  return units === "us" ? 0 : 2;
}

export function formatQuantity(quantity: DisplayQuantity, siValue: number | null | undefined, units: Units): string {
  if (siValue === null || siValue === undefined || !Number.isFinite(siValue)) return "—";
  const { value, unit } = displayValue(quantity, siValue, system(units));
  return `${value.toFixed(digits(quantity, units))} ${unit}`;
}

/** A number with its unit in the user's unit system, tabular. */
export function Quantity({ of, si, units }: { of: DisplayQuantity; si: number | null | undefined; units: Units }) {
  return <span className="num whitespace-nowrap">{formatQuantity(of, si, units)}</span>;
}

export function formatGrams(g: number | null | undefined, decimals = 4): string {
  return g === null || g === undefined || !Number.isFinite(g) ? "—" : `${g.toFixed(decimals)} g`;
}
