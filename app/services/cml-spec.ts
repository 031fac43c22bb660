/**
 * What a CML (condition monitoring location) is made of, in one place for the forms, the
 * CSV import and the model: the component words and the effective base-line rule.
 * Pure, shared by the browser and the server.
 */

/** The components a CML may sit on; the database check holds the same list. */
export const CML_COMPONENTS = ["pipe", "elbow", "tee", "reducer", "cap", "nozzle", "flange", "valve", "other"] as const;
export type CmlComponent = (typeof CML_COMPONENTS)[number];

export const CML_COMPONENT_WORDS: Record<CmlComponent, string> = {
  pipe: "Pipe",
  elbow: "Elbow",
  tee: "Tee",
  reducer: "Reducer",
  cap: "Cap",
  nozzle: "Nozzle",
  flange: "Flange",
  valve: "Valve",
  other: "Other",
};

export const componentWord = (c: string) => CML_COMPONENT_WORDS[c as CmlComponent] ?? c;

/** The effective base-line of a CML: its own, or the circuit's nominal wall less mill tolerance. */
export type EffectiveBaseline =
  | { source: "recorded"; thicknessMm: number; on: string | null }
  | {
      source: "nominal-less-tolerance";
      thicknessMm: number;
      on: string | null;
      nominalMm: number;
      tolerancePct: number;
    }
  | { source: "unknown"; thicknessMm: null; on: string | null };

/**
 * The base-line a CML's rates start from: the recorded thickness when there is one, else
 * the nominal wall less the mill under-tolerance (t_nom × (1 − tol/100)), else unknown.
 */
export function effectiveBaseline(
  recordedMm: number | null,
  on: string | null,
  nominalWallMm: number | null,
  millTolerancePct: number | null,
): EffectiveBaseline {
  if (recordedMm !== null) return { source: "recorded", thicknessMm: recordedMm, on };
  if (nominalWallMm === null) return { source: "unknown", thicknessMm: null, on };
  const tolerancePct = millTolerancePct ?? 12.5;
  return {
    source: "nominal-less-tolerance",
    thicknessMm: Math.round(nominalWallMm * (1 - tolerancePct / 100) * 1000) / 1000,
    on,
    nominalMm: nominalWallMm,
    tolerancePct,
  };
}

/** The base-line in words for a table cell. */
export function baselineWords(b: EffectiveBaseline): string {
  if (b.source === "unknown") return "Not known: enter a base-line or the circuit’s nominal wall.";
  const when = b.on ? ` on ${b.on}` : "";
  if (b.source === "recorded") return `${b.thicknessMm.toFixed(2)} mm${when}`;
  return `${b.thicknessMm.toFixed(2)} mm${when} (nominal ${b.nominalMm.toFixed(2)} mm less ${b.tolerancePct} % mill tolerance)`;
}
