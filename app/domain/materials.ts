/**
 * Coupon and piping materials: density (with its source), nominal
 * composition for equivalent weights, and the B31.3 Y-coefficient group.
 *
 * Standards: ASTM G1 Appendix X1 (densities of metals and alloys for
 * corrosion-rate calculation) — the values below are recalled [mem] and must
 * be confirmed against a licensed copy before they are called normative;
 * ASTM G102 (equivalent weight from composition: mid-range values of the
 * alloying elements above about 1 %, base element takes the balance);
 * UNS designations (SAE/ASTM Unified Numbering System).
 *
 * Store the density used on every coupon: laboratories differ (7.85 vs 7.86
 * for carbon steel), and a rate must be re-derivable from its record.
 */

import { equivalentWeight } from "./electrochemistry.ts";
import type { YMaterialGroup } from "./piping.ts";
import type { MaterialFamily } from "./severity.ts";
import { rangeError } from "./validate.ts";

/** Where a number comes from, in the tags of the project's reference sheet. */
export type SourceTag = "pub" | "der" | "mem" | "cp";

export interface MaterialRecord {
  /** Stable key for storage and look-up, e.g. "carbon-steel". */
  key: string;
  /** Name as engineers say it. */
  name: string;
  /** UNS number, or null where the table lists a family without a single designation. */
  uns: string | null;
  /** Density, g/cm³. */
  densityGcm3: number;
  /** Where the density comes from, in words. */
  densitySource: string;
  densityTag: SourceTag;
  /** Mass percent by element symbol, for equivalentWeight (elements above ~1 %, base element = balance). */
  composition: Readonly<Record<string, number>>;
  compositionSource: string;
  compositionTag: SourceTag;
  /** Family for severity grading (NACE SP0775 bands apply to carbon steel only). */
  family: MaterialFamily;
  /** Row of ASME B31.3 Table 304.1.1 for the Y coefficient. */
  yMaterialGroup: YMaterialGroup;
}

const G1_DENSITY = "ASTM G1 Appendix X1 density, recalled — confirm against a licensed copy";

/** Short source label of the table's densities, for screens (the full caveat stays in densitySource). */
export const DENSITY_SOURCE_LABEL = "ASTM G1, App. X1 (unverified)";
const NOMINAL =
  "Nominal mid-range composition of the grade, recalled; elements below ~1 % omitted, base element takes the balance (ASTM G102 practice)";

/** The materials table. Densities are ASTM G1 appendix values recalled from memory ([mem]). */
export const MATERIALS: readonly MaterialRecord[] = deepFreeze([
  {
    key: "carbon-steel",
    name: "Carbon steel (C1018 coupon)",
    uns: "G10180",
    densityGcm3: 7.86,
    densitySource: G1_DENSITY,
    densityTag: "mem",
    composition: { Fe: 100 },
    compositionSource: NOMINAL,
    compositionTag: "mem",
    family: "carbon-steel",
    yMaterialGroup: "ferritic-steel",
  },
  {
    key: "ss-304",
    name: "Stainless steel type 304",
    uns: "S30400",
    densityGcm3: 7.94,
    densitySource: G1_DENSITY,
    densityTag: "mem",
    composition: { Fe: 71.75, Cr: 19, Ni: 9.25 },
    compositionSource: NOMINAL,
    compositionTag: "mem",
    family: "stainless-steel",
    yMaterialGroup: "austenitic-steel",
  },
  {
    key: "ss-304l",
    name: "Stainless steel type 304L",
    uns: "S30403",
    densityGcm3: 7.94,
    densitySource: G1_DENSITY,
    densityTag: "mem",
    composition: { Fe: 71, Cr: 19, Ni: 10 },
    compositionSource: NOMINAL,
    compositionTag: "mem",
    family: "stainless-steel",
    yMaterialGroup: "austenitic-steel",
  },
  {
    key: "ss-316",
    name: "Stainless steel type 316",
    uns: "S31600",
    densityGcm3: 7.98,
    densitySource: G1_DENSITY,
    densityTag: "mem",
    composition: { Fe: 68.5, Cr: 17, Ni: 12, Mo: 2.5 },
    compositionSource: NOMINAL,
    compositionTag: "mem",
    family: "stainless-steel",
    yMaterialGroup: "austenitic-steel",
  },
  {
    key: "ss-316l",
    name: "Stainless steel type 316L",
    uns: "S31603",
    densityGcm3: 7.98,
    densitySource: G1_DENSITY,
    densityTag: "mem",
    composition: { Fe: 68.5, Cr: 17, Ni: 12, Mo: 2.5 },
    compositionSource: NOMINAL,
    compositionTag: "mem",
    family: "stainless-steel",
    yMaterialGroup: "austenitic-steel",
  },
  {
    key: "copper",
    name: "Copper (electrolytic tough pitch)",
    uns: "C11000",
    densityGcm3: 8.94,
    densitySource: G1_DENSITY,
    densityTag: "mem",
    composition: { Cu: 100 },
    compositionSource: NOMINAL,
    compositionTag: "mem",
    family: "copper-alloy",
    yMaterialGroup: "other-ductile",
  },
  {
    key: "admiralty-brass",
    name: "Admiralty brass",
    uns: "C44300",
    densityGcm3: 8.52,
    densitySource: G1_DENSITY,
    densityTag: "mem",
    composition: { Cu: 71.5, Zn: 27.5, Sn: 1 },
    compositionSource: NOMINAL,
    compositionTag: "mem",
    family: "copper-alloy",
    yMaterialGroup: "other-ductile",
  },
  {
    key: "cu-ni-90-10",
    name: "90/10 copper-nickel",
    uns: "C70600",
    densityGcm3: 8.94,
    densitySource: G1_DENSITY,
    densityTag: "mem",
    composition: { Cu: 88.6, Ni: 10, Fe: 1.4 },
    compositionSource: NOMINAL,
    compositionTag: "mem",
    family: "copper-alloy",
    yMaterialGroup: "other-ductile",
  },
  {
    key: "al-6061",
    name: "Aluminium alloy 6061",
    uns: "A96061",
    densityGcm3: 2.7,
    densitySource: G1_DENSITY,
    densityTag: "mem",
    composition: { Al: 99, Mg: 1 },
    compositionSource: NOMINAL,
    compositionTag: "mem",
    family: "aluminium-alloy",
    yMaterialGroup: "other-ductile",
  },
  {
    key: "titanium-gr2",
    name: "Titanium grade 2",
    uns: "R50400",
    densityGcm3: 4.51,
    densitySource: G1_DENSITY,
    densityTag: "mem",
    composition: { Ti: 100 },
    compositionSource: NOMINAL,
    compositionTag: "mem",
    family: "titanium",
    yMaterialGroup: "other-ductile",
  },
  {
    key: "zinc",
    name: "Zinc",
    uns: null,
    densityGcm3: 7.13,
    densitySource: G1_DENSITY,
    densityTag: "mem",
    composition: { Zn: 100 },
    compositionSource: NOMINAL,
    compositionTag: "mem",
    family: "zinc",
    yMaterialGroup: "other-ductile",
  },
  {
    key: "lead",
    name: "Lead",
    uns: null,
    densityGcm3: 11.35,
    densitySource: G1_DENSITY,
    densityTag: "mem",
    composition: { Pb: 100 },
    compositionSource: NOMINAL,
    compositionTag: "mem",
    family: "lead",
    yMaterialGroup: "other-ductile",
  },
  {
    key: "nickel-200",
    name: "Nickel 200",
    uns: "N02200",
    densityGcm3: 8.89,
    densitySource: G1_DENSITY,
    densityTag: "mem",
    composition: { Ni: 100 },
    compositionSource: NOMINAL,
    compositionTag: "mem",
    family: "nickel-alloy",
    yMaterialGroup: "other-ductile",
  },
  {
    key: "alloy-625",
    name: "Nickel alloy 625",
    uns: "N06625",
    densityGcm3: 8.44,
    densitySource: G1_DENSITY,
    densityTag: "mem",
    // Nb+Ta counted as Nb; Fe (≤ 5 % max) taken at half its maximum [cp].
    composition: { Ni: 63.35, Cr: 21.5, Mo: 9, Nb: 3.65, Fe: 2.5 },
    compositionSource: NOMINAL,
    compositionTag: "mem",
    family: "nickel-alloy",
    yMaterialGroup: "other-ductile",
  },
  {
    key: "alloy-c276",
    name: "Nickel alloy C-276",
    uns: "N10276",
    densityGcm3: 8.89,
    densitySource: G1_DENSITY,
    densityTag: "mem",
    composition: { Ni: 59.25, Mo: 16, Cr: 15.5, Fe: 5.5, W: 3.75 },
    compositionSource: NOMINAL,
    compositionTag: "mem",
    family: "nickel-alloy",
    yMaterialGroup: "other-ductile",
  },
] satisfies MaterialRecord[]);

/** The table is shared by every request: freeze it so no caller can change a density in place. */
function deepFreeze(list: MaterialRecord[]): readonly MaterialRecord[] {
  for (const m of list) {
    Object.freeze(m.composition);
    Object.freeze(m);
  }
  return Object.freeze(list);
}

/** A material by its key or UNS number (case-insensitive); throws when unknown. */
export function findMaterial(keyOrUns: string): MaterialRecord {
  if (typeof keyOrUns === "string") {
    const wanted = keyOrUns.trim().toUpperCase();
    for (const m of MATERIALS) {
      if (m.key.toUpperCase() === wanted || (m.uns !== null && m.uns === wanted)) return m;
    }
  }
  throw rangeError(
    "keyOrUns",
    `a material key or UNS number of the table (${MATERIALS.map((m) => m.key).join(", ")})`,
    keyOrUns,
  );
}

/** Equivalent weight of a table material from its nominal composition (ASTM G102). */
export function materialEquivalentWeight(keyOrUns: string, valenceBySymbol?: Record<string, number>): number {
  return equivalentWeight({ ...findMaterial(keyOrUns).composition }, valenceBySymbol);
}
