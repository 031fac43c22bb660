import { z } from "zod";
import {
  DEFAULT_MINIMUM_EXPOSURE_DAYS,
  type RatePolicyName,
  MATERIAL_FAMILIES,
  validateThresholds,
  type FamilyThresholds,
  type MaterialFamily,
  type SeverityThresholds,
} from "../domain/index.ts";
import type { Db } from "../services/db.server";
import { optionalDecimal, sentVersion, wholeNumber, type FormInput } from "../services/form-fields";
import { Conflict, NotFoundInTenant, parseOrThrow } from "../services/outcome";
import { auditedWrite, type Actor } from "./audit.server";
import { queueLifeRecompute } from "./circuit-life.server";

/**
 * The owner's settings: severity thresholds, minimum exposure, whether photos are required,
 * and the remaining-life rate policy. A change of the thresholds or of the rate policy
 * queues a recompute of every circuit's remaining life in the same transaction.
 */

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
    // A tick box sends "off", then "on" when ticked (the last value wins).
    photos_required: z.enum(["on", "off"], { error: "Tick the box or leave it empty." }).optional(),
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
    return {
      general: bands.general,
      pitting: bands.pitting,
      minimumExposureDays: v.minimum_exposure_days,
      photosRequired: v.photos_required === "on",
    };
  });

/** What the calculation code needs: thresholds in mm/y (undefined = SP0775 defaults) and the minimum exposure. */
export type OwnerSettings = {
  generalThresholds?: SeverityThresholds;
  pittingThresholds?: SeverityThresholds;
  minimumExposureDays: number;
  /** A coupon submitted without a photo raises a warning the engineer must acknowledge. */
  photosRequired: boolean;
  /** Thresholds for other material families; a family left out is not graded. */
  familyThresholds: FamilyThresholds;
} & LifePolicy;

/** The remaining-life rate policy (owner_settings columns of the thickness migration). */
export type LifePolicy = {
  ratePolicy: RatePolicyName;
  /** Stated minimum rate, mm/y: a floor under every governing rate; null = none. */
  minimumRateMmPerYear: number | null;
  couponWindowYears: number;
  couponRateBasis: "general" | "pitting";
  rateDisagreementFactor: number;
  /** The owner's maximum thickness-inspection interval, years; null = the class maximum alone. */
  maxIntervalYears: number | null;
};

export const LIFE_POLICY_DEFAULTS: LifePolicy = {
  ratePolicy: "greater_of_long_short",
  minimumRateMmPerYear: null,
  couponWindowYears: 2,
  couponRateBasis: "general",
  rateDisagreementFactor: 2,
  maxIntervalYears: null,
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
  photos_required: boolean;
};

type LifePolicyRow = {
  rate_policy: RatePolicyName;
  minimum_rate_mm_y: string | null;
  coupon_window_years: string;
  coupon_rate_basis: "general" | "pitting";
  rate_disagreement_factor: string;
  max_interval_years: string | null;
};
const lifePolicyColumns: Array<keyof LifePolicyRow> = [
  "rate_policy",
  "minimum_rate_mm_y",
  "coupon_window_years",
  "coupon_rate_basis",
  "rate_disagreement_factor",
  "max_interval_years",
];

function lifePolicyFromRow(row: LifePolicyRow | undefined): LifePolicy {
  if (!row) return { ...LIFE_POLICY_DEFAULTS };
  return {
    ratePolicy: row.rate_policy,
    minimumRateMmPerYear: row.minimum_rate_mm_y === null ? null : Number(row.minimum_rate_mm_y),
    couponWindowYears: Number(row.coupon_window_years),
    couponRateBasis: row.coupon_rate_basis,
    rateDisagreementFactor: Number(row.rate_disagreement_factor),
    maxIntervalYears: row.max_interval_years === null ? null : Number(row.max_interval_years),
  };
}

function settingsFromRow(row: SettingsRow | undefined): Omit<OwnerSettings, "familyThresholds" | keyof LifePolicy> {
  const band = (kind: "general" | "pitting"): SeverityThresholds | undefined =>
    row && row[`${kind}_moderate_mm_y`] !== null && row[`${kind}_moderate_mm_y`] !== undefined
      ? {
          moderate: Number(row[`${kind}_moderate_mm_y`]),
          high: Number(row[`${kind}_high_mm_y`]),
          severe: Number(row[`${kind}_severe_mm_y`]),
        }
      : undefined;
  const settings: Omit<OwnerSettings, "familyThresholds" | keyof LifePolicy> = {
    minimumExposureDays: row ? Number(row.minimum_exposure_days) : DEFAULT_MINIMUM_EXPOSURE_DAYS,
    photosRequired: row ? Boolean(row.photos_required) : false,
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
  "photos_required",
];

/** The version of the owner's stored settings (0 before the first save): the settings form sends it back. */
export async function ownerSettingsVersion(conn: Db, ownerId: string): Promise<number> {
  const row: { version: number } | undefined = await conn("owner_settings")
    .where({ owner_id: ownerId })
    .first("version");
  return row?.version ?? 0;
}

/** The owner's thresholds and minimum exposure; defaults when nothing is stored. */
export async function ownerSettings(conn: Db, ownerId: string): Promise<OwnerSettings> {
  const row: (SettingsRow & LifePolicyRow) | undefined = await conn("owner_settings")
    .where({ owner_id: ownerId })
    .first([...settingsColumns, ...lifePolicyColumns]);
  return {
    ...settingsFromRow(row),
    ...lifePolicyFromRow(row),
    familyThresholds: await familyThresholds(conn, ownerId),
  };
}

/** The rate policy alone (the recompute reads it for many owners at once with `lifePolicies`). */
export async function lifePolicies(conn: Db, ownerIds: string[]): Promise<Map<string, LifePolicy>> {
  const rows: Array<LifePolicyRow & { owner_id: string }> = await conn("owner_settings")
    .whereIn("owner_id", ownerIds)
    .select(["owner_id", ...lifePolicyColumns]);
  const out = new Map<string, LifePolicy>();
  for (const id of ownerIds) out.set(id, { ...LIFE_POLICY_DEFAULTS });
  for (const r of rows) out.set(r.owner_id, lifePolicyFromRow(r));
  return out;
}

// ── The remaining-life rate policy ────────────────────────────────────────────

export const lifePolicySchema = z.object({
  rate_policy: z.enum(["greater_of_long_short", "regression_upper"], {
    error: "Choose the rate policy: the greater of long-term and short-term, or the regression's upper bound.",
  }),
  minimum_rate_mm_y: optionalDecimal({ what: "the stated minimum rate", unit: "mm/y", gt: 0, max: 9999, decimals: 4 }),
  coupon_window_years: optionalDecimal({ what: "the coupon window", unit: "years", gt: 0, max: 20, decimals: 2 }),
  coupon_rate_basis: z.enum(["general", "pitting"], { error: "Choose general or pitting." }),
  rate_disagreement_factor: optionalDecimal({
    what: "the disagreement factor",
    unit: "",
    gt: 1,
    max: 1000,
    decimals: 2,
  }),
  max_interval_years: optionalDecimal({ what: "the maximum interval", unit: "years", gt: 0, max: 20, decimals: 2 }),
});

/**
 * Stores the owner's rate policy with an audit event and, when it changed, queues a
 * recompute of every circuit's remaining life in the same transaction.
 */
export async function saveLifePolicy(
  conn: Db,
  ownerId: string,
  actor: Actor,
  input: FormInput,
  requestId?: string | null,
): Promise<{ policy: LifePolicy; changed: boolean; runId: string | null }> {
  const v = parseOrThrow(lifePolicySchema, input);
  const values = {
    rate_policy: v.rate_policy,
    minimum_rate_mm_y: v.minimum_rate_mm_y ?? null,
    coupon_window_years: v.coupon_window_years ?? LIFE_POLICY_DEFAULTS.couponWindowYears,
    coupon_rate_basis: v.coupon_rate_basis,
    rate_disagreement_factor: v.rate_disagreement_factor ?? LIFE_POLICY_DEFAULTS.rateDisagreementFactor,
    max_interval_years: v.max_interval_years ?? null,
  };
  const version = sentVersion(input);
  return auditedWrite(conn, { ownerId, actor, requestId }, async ({ trx, record }) => {
    const beforeRow: (LifePolicyRow & { version: number }) | undefined = await trx("owner_settings")
      .where({ owner_id: ownerId })
      .forUpdate()
      .first([...lifePolicyColumns, "version"]);
    if (version !== undefined && version !== (beforeRow?.version ?? 0))
      throw new Conflict(
        "The settings were changed by someone else after you opened this page. Reload the page to see them, then make your change again.",
      );
    const before = lifePolicyFromRow(beforeRow);
    const [afterRow]: LifePolicyRow[] = await trx("owner_settings")
      .insert({ owner_id: ownerId, ...values })
      .onConflict("owner_id")
      .merge({ ...values, version: trx.raw("owner_settings.version + 1"), updated_at: trx.fn.now() })
      .returning(lifePolicyColumns);
    const after = lifePolicyFromRow(afterRow);
    const changed = JSON.stringify(before) !== JSON.stringify(after);
    let runId: string | null = null;
    if (changed) {
      await record({
        action: "life_policy.updated",
        recordType: "owner_settings",
        recordId: ownerId,
        before,
        after,
      });
      runId = await queueLifeRecompute(trx, {
        ownerId,
        trigger: "policy",
        reason: "The remaining-life rate policy changed.",
        requestedBy: actor.userId,
      });
    }
    return { policy: after, changed, runId };
  });
}

/** Coupon grades feed the circuits' coupon rates: a threshold change queues a recompute. */
function queueThresholdRecompute(trx: Db, ownerId: string, actor: Actor) {
  return queueLifeRecompute(trx, {
    ownerId,
    trigger: "thresholds",
    reason: "The coupon severity thresholds changed.",
    requestedBy: actor.userId,
  });
}

// ── Thresholds per material family ────────────────────────────────────────────

type FamilyRow = {
  family: MaterialFamily;
  kind: "general" | "pitting";
  moderate_mm_y: string;
  high_mm_y: string;
  severe_mm_y: string;
};

const otherFamilies = MATERIAL_FAMILIES.filter((f) => f !== "carbon-steel") as [MaterialFamily, ...MaterialFamily[]];

/** The owner's thresholds for families other than carbon steel, as the calculation library takes them. */
export async function familyThresholds(conn: Db, ownerId: string): Promise<FamilyThresholds> {
  const rows: FamilyRow[] = await conn("owner_family_thresholds")
    .where({ owner_id: ownerId })
    .orderBy(["family", "kind"])
    .select("family", "kind", "moderate_mm_y", "high_mm_y", "severe_mm_y");
  const out: FamilyThresholds = {};
  for (const r of rows)
    out[r.family] = {
      ...out[r.family],
      [r.kind]: { moderate: Number(r.moderate_mm_y), high: Number(r.high_mm_y), severe: Number(r.severe_mm_y) },
    };
  return out;
}

export const familyThresholdSchema = z
  .object({
    family: z.enum(otherFamilies, { error: "Choose the material family (carbon steel is set above)." }),
    kind: z.enum(["general", "pitting"], { error: "Choose general or pitting." }),
    moderate: threshold("moderate-from"),
    high: threshold("high-from"),
    severe: threshold("severe-above"),
  })
  .transform((v, ctx) => {
    for (const level of ["moderate", "high", "severe"] as const)
      if (v[level] === undefined)
        ctx.addIssue({ code: "custom", path: [level], message: "Fill in all three thresholds in mm/y." });
    if (v.moderate === undefined || v.high === undefined || v.severe === undefined) return z.NEVER;
    try {
      return {
        family: v.family,
        kind: v.kind,
        thresholds: validateThresholds({ moderate: v.moderate, high: v.high, severe: v.severe }),
      };
    } catch (error) {
      const level = /^thresholds\.(\w+)/.exec((error as Error).message)?.[1] ?? "high";
      ctx.addIssue({
        code: "custom",
        path: [level === "severe" ? "severe" : "high"],
        message:
          level === "severe"
            ? `Severe-above must be at least high-from (${v.high} mm/y).`
            : `High-from must be greater than moderate-from (${v.moderate} mm/y).`,
      });
      return z.NEVER;
    }
  });

/** Sets (or replaces) the thresholds of one family and kind, with an audit event. */
export async function saveFamilyThreshold(
  conn: Db,
  ownerId: string,
  actor: Actor,
  input: FormInput,
  requestId?: string | null,
) {
  const v = parseOrThrow(familyThresholdSchema, input);
  return auditedWrite(conn, { ownerId, actor, requestId }, async ({ trx, record }) => {
    const key = { owner_id: ownerId, family: v.family, kind: v.kind };
    const before: FamilyRow | undefined = await trx("owner_family_thresholds")
      .where(key)
      .forUpdate()
      .first("moderate_mm_y", "high_mm_y", "severe_mm_y");
    const values = {
      moderate_mm_y: v.thresholds.moderate,
      high_mm_y: v.thresholds.high,
      severe_mm_y: v.thresholds.severe,
    };
    await trx("owner_family_thresholds")
      .insert({ ...key, ...values })
      .onConflict(["owner_id", "family", "kind"])
      .merge({ ...values, updated_at: trx.fn.now() });
    await record({
      action: "owner_settings.updated",
      recordType: "owner_settings",
      recordId: ownerId,
      before: before
        ? {
            family: v.family,
            kind: v.kind,
            moderate: Number(before.moderate_mm_y),
            high: Number(before.high_mm_y),
            severe: Number(before.severe_mm_y),
          }
        : null,
      after: { family: v.family, kind: v.kind, ...v.thresholds },
    });
    await queueThresholdRecompute(trx, ownerId, actor);
    return { family: v.family, kind: v.kind };
  });
}

/** Removes the thresholds of one family and kind (its coupons are then not graded). */
export async function removeFamilyThreshold(
  conn: Db,
  ownerId: string,
  actor: Actor,
  input: FormInput,
  requestId?: string | null,
) {
  const v = parseOrThrow(
    z.object({
      family: z.enum(otherFamilies, { error: "Choose the material family." }),
      kind: z.enum(["general", "pitting"], { error: "Choose general or pitting." }),
    }),
    input,
  );
  return auditedWrite(conn, { ownerId, actor, requestId }, async ({ trx, record }) => {
    const removed = await trx("owner_family_thresholds")
      .where({ owner_id: ownerId, family: v.family, kind: v.kind })
      .delete();
    if (removed === 0) throw new NotFoundInTenant("threshold");
    await record({
      action: "owner_settings.updated",
      recordType: "owner_settings",
      recordId: ownerId,
      before: { family: v.family, kind: v.kind },
      after: null,
    });
    await queueThresholdRecompute(trx, ownerId, actor);
    return v;
  });
}

/** Stores the owner's settings (insert or update in one statement) with an audit event. */
export async function saveOwnerSettings(
  conn: Db,
  ownerId: string,
  actor: Actor,
  input: FormInput,
  requestId?: string | null,
): Promise<{ settings: Omit<OwnerSettings, "familyThresholds" | keyof LifePolicy>; changed: boolean }> {
  const { general, pitting, minimumExposureDays, photosRequired } = parseOrThrow(settingsSchema, input);
  const values = {
    general_moderate_mm_y: general?.moderate ?? null,
    general_high_mm_y: general?.high ?? null,
    general_severe_mm_y: general?.severe ?? null,
    pitting_moderate_mm_y: pitting?.moderate ?? null,
    pitting_high_mm_y: pitting?.high ?? null,
    pitting_severe_mm_y: pitting?.severe ?? null,
    minimum_exposure_days: minimumExposureDays,
    photos_required: photosRequired,
  };
  const version = sentVersion(input);
  return auditedWrite(conn, { ownerId, actor, requestId }, async ({ trx, record }) => {
    const beforeRow: (SettingsRow & { version: number }) | undefined = await trx("owner_settings")
      .where({ owner_id: ownerId })
      .forUpdate()
      .first([...settingsColumns, "version"]);
    if (version !== undefined && version !== (beforeRow?.version ?? 0))
      throw new Conflict(
        "The settings were changed by someone else after you opened this page. Reload the page to see them, then make your change again.",
      );
    const before = settingsFromRow(beforeRow);
    const [afterRow]: SettingsRow[] = await trx("owner_settings")
      .insert({ owner_id: ownerId, ...values })
      .onConflict("owner_id")
      .merge({ ...values, version: trx.raw("owner_settings.version + 1"), updated_at: trx.fn.now() })
      .returning(settingsColumns);
    const after = settingsFromRow(afterRow);
    const changed = JSON.stringify(before) !== JSON.stringify(after);
    if (changed) {
      await record({
        action: "owner_settings.updated",
        recordType: "owner_settings",
        recordId: ownerId,
        before: beforeRow ? before : null,
        after,
      });
      if (
        JSON.stringify([before.generalThresholds, before.pittingThresholds]) !==
        JSON.stringify([after.generalThresholds, after.pittingThresholds])
      )
        await queueThresholdRecompute(trx, ownerId, actor);
    }
    return { settings: after, changed };
  });
}
