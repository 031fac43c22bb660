import { z } from "zod";
import type { Db } from "../services/db.server";
import { CML_COMPONENTS, effectiveBaseline, type EffectiveBaseline } from "../services/cml-spec";
import {
  checkbox,
  dateField,
  optionalDate,
  optionalDecimal,
  optionalText,
  requiredText,
  tagField,
  type FormInput,
} from "../services/form-fields";
import { isUuid } from "../services/ids";
import { Invalid, NotFoundInTenant, parseOrThrow } from "../services/outcome";
import { queueLifeRecompute } from "./circuit-life.server";
import { auditedWrite, changedKeys, type Actor } from "./audit.server";

/**
 * CMLs (condition monitoring locations) of a circuit: their set-up, retirement, replaced
 * components, and the list with each CML's effective base-line and last approved reading.
 */

export const cmlSchema = z.object({
  tag: tagField("the CML tag"),
  location: optionalText("the location", 200),
  component: z.enum(CML_COMPONENTS, { error: "Choose the component the CML is on from the list." }),
  injection_point: checkbox(false),
  baseline_thickness_mm: optionalDecimal({
    what: "the base-line thickness",
    unit: "mm",
    gt: 0,
    max: 500,
    decimals: 3,
  }),
  baseline_on: optionalDate("the base-line date"),
});

export const replacementSchema = z.object({
  replaced_on: dateField("the date of the replacement"),
  reason: requiredText("the reason for the replacement", 500).refine(
    (r) => r.length >= 3,
    "Say in a few words why the component was replaced (at least 3 characters).",
  ),
  baseline_thickness_mm: optionalDecimal({
    what: "the new component’s base-line thickness",
    unit: "mm",
    gt: 0,
    max: 500,
    decimals: 3,
  }),
});

export const cmlClash = (tag: string) => ({
  cmls_owner_tag_key: { tag: `This owner already has a CML tagged ${tag}.` },
});

export type CmlSnapshot = {
  tag: string;
  location: string;
  component: string;
  injection_point: boolean;
  baseline_thickness_mm: number | null;
  baseline_on: string | null;
};

export const cmlValuesOf = (v: z.output<typeof cmlSchema>): CmlSnapshot => ({
  tag: v.tag,
  location: v.location,
  component: v.component,
  injection_point: v.injection_point,
  baseline_thickness_mm: v.baseline_thickness_mm ?? null,
  baseline_on: v.baseline_on === "" ? null : v.baseline_on,
});

/** The circuit, if it is the owner's, with its site's calendar day. */
async function ownCircuit(trx: Db, ownerId: string, circuitId: string) {
  const row: { id: string; site_id: string; today: string } | undefined = await trx("circuits as c")
    .join("sites as s", "s.id", "c.site_id")
    .where({ "c.id": circuitId, "s.owner_id": ownerId })
    .first("c.id", "c.site_id", trx.raw("site_today(s.id)::text as today"));
  return row;
}

const futureBaseline = (on: string | null, today: string) =>
  on !== null && on > today
    ? new Invalid({ baseline_on: `The base-line date ${on} is after today (${today}) at the site.` })
    : null;

/**
 * A CML's base-line, replacement, injection-point flag or retirement changes its circuit's
 * remaining life: the owner's life rows are recomputed by a queued run (in this transaction's
 * commit), as for a change of design data.
 */
export async function lifeMoves(trx: Db, ownerId: string, actor: Actor, reason: string): Promise<void> {
  await queueLifeRecompute(trx, { ownerId, trigger: "design", reason, requestedBy: actor.userId });
}

export async function createCml(
  conn: Db,
  ownerId: string,
  actor: Actor,
  circuitId: string,
  input: FormInput,
  requestId?: string | null,
): Promise<{ id: string; tag: string }> {
  if (!isUuid(circuitId)) throw new NotFoundInTenant("circuit");
  const v = parseOrThrow(cmlSchema, input);
  const row = cmlValuesOf(v);
  return auditedWrite(
    conn,
    { ownerId, actor, requestId },
    async ({ trx, record }) => {
      const circuit = await ownCircuit(trx, ownerId, circuitId);
      if (!circuit) throw new NotFoundInTenant("circuit");
      const future = futureBaseline(row.baseline_on, circuit.today);
      if (future) throw future;
      const [cml]: Array<{ id: string }> = await trx("cmls")
        .insert({ ...row, owner_id: ownerId, circuit_id: circuitId })
        .returning(["id"]);
      await record({
        action: "cml.created",
        recordType: "cml",
        recordId: cml.id,
        after: { circuit_id: circuitId, ...row },
      });
      return { id: cml.id, tag: row.tag };
    },
    cmlClash(row.tag),
  );
}

type StoredCml = {
  id: string;
  circuit_id: string;
  tag: string;
  location: string;
  component: string;
  injection_point: boolean;
  baseline_thickness_mm: string | null;
  baseline_on: string | null;
  retired_at: Date | null;
  today: string;
};

/** The CML, locked, if it is the owner's (through its circuit's site, as well as its own owner column). */
async function lockedCml(trx: Db, ownerId: string, cmlId: string): Promise<StoredCml> {
  if (!isUuid(cmlId)) throw new NotFoundInTenant("CML");
  const row: StoredCml | undefined = await trx("cmls as m")
    .join("circuits as c", "c.id", "m.circuit_id")
    .join("sites as s", "s.id", "c.site_id")
    .where({ "m.id": cmlId, "m.owner_id": ownerId, "s.owner_id": ownerId })
    .forUpdate("m")
    .first(
      "m.id",
      "m.circuit_id",
      "m.tag",
      "m.location",
      "m.component",
      "m.injection_point",
      "m.baseline_thickness_mm",
      trx.raw("m.baseline_on::text as baseline_on"),
      "m.retired_at",
      trx.raw("site_today(s.id)::text as today"),
    );
  if (!row) throw new NotFoundInTenant("CML");
  return row;
}

const snapshotOf = (m: StoredCml): CmlSnapshot => ({
  tag: m.tag,
  location: m.location,
  component: m.component,
  injection_point: m.injection_point,
  baseline_thickness_mm: m.baseline_thickness_mm === null ? null : Number(m.baseline_thickness_mm),
  baseline_on: m.baseline_on,
});

export async function updateCml(
  conn: Db,
  ownerId: string,
  actor: Actor,
  cmlId: string,
  input: FormInput,
  requestId?: string | null,
): Promise<{ id: string; circuitId: string; changed: boolean }> {
  if (!isUuid(cmlId)) throw new NotFoundInTenant("CML");
  const v = parseOrThrow(cmlSchema, input);
  const after = cmlValuesOf(v);
  return auditedWrite(
    conn,
    { ownerId, actor, requestId },
    async ({ trx, record }) => {
      const current = await lockedCml(trx, ownerId, cmlId);
      const future = futureBaseline(after.baseline_on, current.today);
      if (future) throw future;
      const before = snapshotOf(current);
      const changed = changedKeys(before, after);
      if (changed.length === 0) return { id: cmlId, circuitId: current.circuit_id, changed: false };
      await trx("cmls")
        .where({ id: cmlId })
        .update({ ...after, updated_at: trx.fn.now() });
      await record({ action: "cml.updated", recordType: "cml", recordId: cmlId, before, after });
      await lifeMoves(trx, ownerId, actor, `CML ${after.tag} was edited.`);
      return { id: cmlId, circuitId: current.circuit_id, changed: true };
    },
    cmlClash(after.tag),
  );
}

/** Retires a CML (no longer surveyed) or returns it to use; its readings and replacements stay. */
export async function setCmlRetired(
  conn: Db,
  ownerId: string,
  actor: Actor,
  cmlId: string,
  retired: boolean,
  requestId?: string | null,
): Promise<{ id: string; tag: string; circuitId: string; changed: boolean }> {
  return auditedWrite(conn, { ownerId, actor, requestId }, async ({ trx, record }) => {
    const current = await lockedCml(trx, ownerId, cmlId);
    const result = { id: cmlId, tag: current.tag, circuitId: current.circuit_id };
    if ((current.retired_at !== null) === retired) return { ...result, changed: false };
    await trx("cmls")
      .where({ id: cmlId })
      .update({ retired_at: retired ? trx.fn.now() : null, updated_at: trx.fn.now() });
    await record({
      action: retired ? "cml.retired" : "cml.returned_to_use",
      recordType: "cml",
      recordId: cmlId,
      before: { tag: current.tag, retired: current.retired_at !== null },
      after: { tag: current.tag, retired },
    });
    await lifeMoves(trx, ownerId, actor, `CML ${current.tag} was ${retired ? "retired" : "returned to use"}.`);
    return { ...result, changed: true };
  });
}

/**
 * Records a replaced component at a CML: a dated reason and the new component's base-line
 * (or none: nominal less mill tolerance). The date may not be after the site's today nor
 * before an earlier replacement of the same CML.
 */
export async function replaceComponent(
  conn: Db,
  ownerId: string,
  actor: Actor,
  cmlId: string,
  input: FormInput,
  requestId?: string | null,
): Promise<{ id: string; tag: string; circuitId: string }> {
  if (!isUuid(cmlId)) throw new NotFoundInTenant("CML");
  const v = parseOrThrow(replacementSchema, input);
  return auditedWrite(
    conn,
    { ownerId, actor, requestId },
    async ({ trx, record }) => {
      const current = await lockedCml(trx, ownerId, cmlId);
      if (v.replaced_on > current.today)
        throw new Invalid({
          replaced_on: `The replacement date ${v.replaced_on} is after today (${current.today}) at the site.`,
        });
      const latest: { replaced_on: string } | undefined = await trx("cml_replacements")
        .where({ cml_id: cmlId })
        .orderBy("replaced_on", "desc")
        .first(trx.raw("replaced_on::text as replaced_on"));
      if (latest && v.replaced_on <= latest.replaced_on)
        throw new Invalid({
          replaced_on:
            v.replaced_on === latest.replaced_on
              ? `This CML already has a replacement on ${latest.replaced_on}.`
              : `This CML’s last replacement was on ${latest.replaced_on}; a later one cannot be dated before it.`,
        });
      const row = {
        cml_id: cmlId,
        replaced_on: v.replaced_on,
        reason: v.reason,
        baseline_thickness_mm: v.baseline_thickness_mm ?? null,
        recorded_by: actor.userId,
      };
      const [inserted]: Array<{ id: string }> = await trx("cml_replacements").insert(row).returning(["id"]);
      await lifeMoves(trx, ownerId, actor, `A component was replaced at CML ${current.tag} on ${v.replaced_on}.`);
      await record({
        action: "cml.component_replaced",
        recordType: "cml",
        recordId: cmlId,
        after: {
          tag: current.tag,
          replaced_on: row.replaced_on,
          reason: row.reason,
          baseline_thickness_mm: row.baseline_thickness_mm,
        },
        reason: v.reason,
      });
      return { id: inserted.id, tag: current.tag, circuitId: current.circuit_id };
    },
    { cml_replacements_cml_day_key: { replaced_on: "This CML already has a replacement on that day." } },
  );
}

export type CmlReplacementView = { replacedOn: string; reason: string; baselineThicknessMm: number | null };

/** A CML as the set-up page and the survey grid show it. */
export type CmlView = {
  id: string;
  circuitId: string;
  tag: string;
  location: string;
  component: string;
  injectionPoint: boolean;
  /** As recorded on the CML (null: nominal less mill tolerance). */
  recordedBaselineMm: number | null;
  recordedBaselineOn: string | null;
  /** The base-line rates start from: the latest replacement's, else the CML's own. */
  baseline: EffectiveBaseline;
  latestReplacement: CmlReplacementView | null;
  lastApprovedReading: { measuredOn: string; thicknessMm: number } | null;
  retired: boolean;
};

type CmlListRow = {
  id: string;
  circuit_id: string;
  tag: string;
  location: string;
  component: string;
  injection_point: boolean;
  baseline_thickness_mm: string | null;
  baseline_on: string | null;
  retired_at: Date | null;
  nominal_wall_mm: string | null;
  mill_tolerance_pct: string | null;
  replaced_on: string | null;
  replacement_reason: string | null;
  replacement_baseline_mm: string | null;
  reading_on: string | null;
  reading_mm: string | null;
};

const num = (v: string | null) => (v === null ? null : Number(v));

/**
 * The CMLs of several circuits of one owner, in one query: each with its effective base-line
 * (the latest replacement's, else its own, else the circuit's nominal wall less mill
 * tolerance), its latest replacement and its last approved reading. Retired CMLs are
 * included (flagged) unless `activeOnly`.
 */
export async function cmlsOfCircuits(
  conn: Db,
  ownerId: string,
  circuitIds: string[],
  options: { activeOnly?: boolean } = {},
): Promise<CmlView[]> {
  const ids = circuitIds.filter(isUuid);
  if (ids.length === 0) return [];
  const { rows } = await conn.raw<{ rows: CmlListRow[] }>(
    `select m.id, m.circuit_id, m.tag, m.location, m.component, m.injection_point,
            m.baseline_thickness_mm, m.baseline_on::text as baseline_on, m.retired_at,
            c.nominal_wall_mm, c.mill_tolerance_pct,
            r.replaced_on::text as replaced_on, r.reason as replacement_reason,
            r.baseline_thickness_mm as replacement_baseline_mm,
            t.measured_on::text as reading_on, t.thickness_mm as reading_mm
       from cmls m
       join circuits c on c.id = m.circuit_id
       join sites s on s.id = c.site_id and s.owner_id = m.owner_id
       left join lateral (
         select x.replaced_on, x.reason, x.baseline_thickness_mm from cml_replacements x
          where x.cml_id = m.id order by x.replaced_on desc limit 1) r on true
       left join lateral (
         select tr.measured_on, tr.thickness_mm from thickness_readings tr
           join submissions sub on sub.id = tr.submission_id and sub.status = 'approved' and sub.owner_id = m.owner_id
          where tr.cml_id = m.id order by tr.measured_on desc, sub.decided_at desc limit 1) t on true
      where m.owner_id = ? and m.circuit_id = any(?::uuid[])
        ${options.activeOnly ? "and m.retired_at is null" : ""}
      order by m.circuit_id, m.tag`,
    [ownerId, ids],
  );
  return rows.map((r) => {
    const nominal = num(r.nominal_wall_mm);
    const tolerance = num(r.mill_tolerance_pct);
    const latestReplacement =
      r.replaced_on === null
        ? null
        : {
            replacedOn: r.replaced_on,
            reason: r.replacement_reason ?? "",
            baselineThicknessMm: num(r.replacement_baseline_mm),
          };
    const baseline = latestReplacement
      ? effectiveBaseline(latestReplacement.baselineThicknessMm, latestReplacement.replacedOn, nominal, tolerance)
      : effectiveBaseline(num(r.baseline_thickness_mm), r.baseline_on, nominal, tolerance);
    return {
      id: r.id,
      circuitId: r.circuit_id,
      tag: r.tag,
      location: r.location,
      component: r.component,
      injectionPoint: r.injection_point,
      recordedBaselineMm: num(r.baseline_thickness_mm),
      recordedBaselineOn: r.baseline_on,
      baseline,
      latestReplacement,
      lastApprovedReading:
        r.reading_on === null || r.reading_mm === null
          ? null
          : { measuredOn: r.reading_on, thicknessMm: Number(r.reading_mm) },
      retired: r.retired_at !== null,
    };
  });
}

/** Every replacement of the CMLs of a circuit, newest first per CML. */
export async function replacementsOfCircuit(
  conn: Db,
  ownerId: string,
  circuitId: string,
): Promise<Array<CmlReplacementView & { cmlId: string; recordedBy: string | null }>> {
  if (!isUuid(circuitId)) return [];
  const rows: Array<{
    cml_id: string;
    replaced_on: string;
    reason: string;
    baseline_thickness_mm: string | null;
    recorded_by: string | null;
  }> = await conn("cml_replacements as r")
    .join("cmls as m", "m.id", "r.cml_id")
    .leftJoin("users as u", "u.id", "r.recorded_by")
    .where({ "m.owner_id": ownerId, "m.circuit_id": circuitId })
    .orderBy([
      { column: "m.tag", order: "asc" },
      { column: "r.replaced_on", order: "desc" },
    ])
    .select(
      "r.cml_id",
      conn.raw("r.replaced_on::text as replaced_on"),
      "r.reason",
      "r.baseline_thickness_mm",
      conn.raw("coalesce(u.name, u.email) as recorded_by"),
    );
  return rows.map((r) => ({
    cmlId: r.cml_id,
    replacedOn: r.replaced_on,
    reason: r.reason,
    baselineThicknessMm: num(r.baseline_thickness_mm),
    recordedBy: r.recorded_by,
  }));
}
