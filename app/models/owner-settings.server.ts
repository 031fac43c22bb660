import { z } from "zod";
import { DEFAULT_MINIMUM_EXPOSURE_DAYS, validateThresholds, type SeverityThresholds } from "../domain/index.ts";
import type { Db } from "../services/db.server";
import { optionalDecimal, wholeNumber, type FormInput } from "../services/form-fields";
import { parseOrThrow } from "../services/outcome";
import { auditedWrite, type Actor } from "./audit.server";

/** The owner's settings: severity thresholds and minimum exposure. */

/** One default for the form, the library and the stored settings (the library's, with its note). */
export { DEFAULT_MINIMUM_EXPOSURE_DAYS };
const threshold = (what: string) => optionalDecimal({ what, unit: "mm/y", gt: 0, max: 9999, decimals: 4 });
const KIND_WORDS = { general: "general", pitting: "pitting" } as const;

export const settingsSchema = z
  .object({
    general_moderate: threshold("moderate-from"),
    general_high: threshold("high-from"),
    general_severe: threshold("severe-above"),
    pitting_moderate: threshold("moderate-from"),
    pitting_high: threshold("high-from"),
    pitting_severe: threshold("severe-above"),
    minimum_exposure_days: wholeNumber("the minimum exposure", "days", 1, 365, DEFAULT_MINIMUM_EXPOSURE_DAYS),
  })
  .transform((v, ctx) => {
    const bands = {} as Record<"general" | "pitting", SeverityThresholds | null>;
    for (const kind of ["general", "pitting"] as const) {
      const t = { moderate: v[`${kind}_moderate`], high: v[`${kind}_high`], severe: v[`${kind}_severe`] };
      const given = Object.values(t).filter((x) => x !== undefined).length;
      if (given === 0) {
        bands[kind] = null;
        continue;
      }
      if (given < 3) {
        for (const level of ["moderate", "high", "severe"] as const)
          if (t[level] === undefined)
            ctx.addIssue({
              code: "custom",
              path: [`${kind}_${level}`],
              message: `Fill in all three ${KIND_WORDS[kind]} thresholds, or leave all three empty for the SP0775 defaults.`,
            });
        bands[kind] = null;
        continue;
      }
      try {
        bands[kind] = validateThresholds(t);
      } catch (error) {
        const level = /^thresholds\.(\w+)/.exec((error as Error).message)?.[1] ?? "high";
        const message =
          level === "severe"
            ? `Severe-above must be at least high-from (${t.high} mm/y).`
            : `High-from must be greater than moderate-from (${t.moderate} mm/y).`;
        ctx.addIssue({ code: "custom", path: [`${kind}_${level}`], message });
        bands[kind] = null;
      }
    }
    return { general: bands.general, pitting: bands.pitting, minimumExposureDays: v.minimum_exposure_days };
  });

/** What the calculation code needs: thresholds in mm/y (undefined = SP0775 defaults) and the minimum exposure. */
export type OwnerSettings = {
  generalThresholds?: SeverityThresholds;
  pittingThresholds?: SeverityThresholds;
  minimumExposureDays: number;
};

/** owner_settings as PostgreSQL returns it (NUMERIC as strings). */
type SettingsRow = {
  general_moderate_mm_y: string | null;
  general_high_mm_y: string | null;
  general_severe_mm_y: string | null;
  pitting_moderate_mm_y: string | null;
  pitting_high_mm_y: string | null;
  pitting_severe_mm_y: string | null;
  minimum_exposure_days: number;
};

function settingsFromRow(row: SettingsRow | undefined): OwnerSettings {
  const band = (kind: "general" | "pitting"): SeverityThresholds | undefined =>
    row && row[`${kind}_moderate_mm_y`] !== null && row[`${kind}_moderate_mm_y`] !== undefined
      ? {
          moderate: Number(row[`${kind}_moderate_mm_y`]),
          high: Number(row[`${kind}_high_mm_y`]),
          severe: Number(row[`${kind}_severe_mm_y`]),
        }
      : undefined;
  const settings: OwnerSettings = {
    minimumExposureDays: row ? Number(row.minimum_exposure_days) : DEFAULT_MINIMUM_EXPOSURE_DAYS,
  };
  const general = band("general");
  const pitting = band("pitting");
  if (general) settings.generalThresholds = general;
  if (pitting) settings.pittingThresholds = pitting;
  return settings;
}

const settingsColumns: Array<keyof SettingsRow> = [
  "general_moderate_mm_y",
  "general_high_mm_y",
  "general_severe_mm_y",
  "pitting_moderate_mm_y",
  "pitting_high_mm_y",
  "pitting_severe_mm_y",
  "minimum_exposure_days",
];

/** The owner's thresholds and minimum exposure; defaults when nothing is stored. */
export async function ownerSettings(conn: Db, ownerId: string): Promise<OwnerSettings> {
  const row: SettingsRow | undefined = await conn("owner_settings").where({ owner_id: ownerId }).first(settingsColumns);
  return settingsFromRow(row);
}

/** Stores the owner's settings (insert or update in one statement) with an audit event. */
export async function saveOwnerSettings(
  conn: Db,
  ownerId: string,
  actor: Actor,
  input: FormInput,
  requestId?: string | null,
): Promise<{ settings: OwnerSettings; changed: boolean }> {
  const { general, pitting, minimumExposureDays } = parseOrThrow(settingsSchema, input);
  const values = {
    general_moderate_mm_y: general?.moderate ?? null,
    general_high_mm_y: general?.high ?? null,
    general_severe_mm_y: general?.severe ?? null,
    pitting_moderate_mm_y: pitting?.moderate ?? null,
    pitting_high_mm_y: pitting?.high ?? null,
    pitting_severe_mm_y: pitting?.severe ?? null,
    minimum_exposure_days: minimumExposureDays,
  };
  return auditedWrite(conn, { ownerId, actor, requestId }, async ({ trx, record }) => {
    const beforeRow: SettingsRow | undefined = await trx("owner_settings")
      .where({ owner_id: ownerId })
      .forUpdate()
      .first(settingsColumns);
    const before = settingsFromRow(beforeRow);
    const [afterRow]: SettingsRow[] = await trx("owner_settings")
      .insert({ owner_id: ownerId, ...values })
      .onConflict("owner_id")
      .merge({ ...values, updated_at: trx.fn.now() })
      .returning(settingsColumns);
    const after = settingsFromRow(afterRow);
    const changed = JSON.stringify(before) !== JSON.stringify(after);
    if (changed)
      await record({
        action: "owner_settings.updated",
        recordType: "owner_settings",
        recordId: ownerId,
        before: beforeRow ? before : null,
        after,
      });
    return { settings: after, changed };
  });
}
