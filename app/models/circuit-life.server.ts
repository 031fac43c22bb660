import type { Knex } from "knex";
import { z } from "zod";
import {
  LIFE_STATUS_WORDS,
  assessCircuitLife,
  lifeStatus,
  type CircuitLife,
  type CouponRateInput,
  type LifeCondition,
  type ThicknessReading,
} from "../domain/index.ts";
import { isApiClient, type Reader, type SessionUser } from "../context";
import { CAUTION } from "../services/caution";
import type { Db } from "../services/db.server";
import { isUuid } from "../services/ids";
import { requiredText, type FormInput } from "../services/form-fields";
import { NotFoundInTenant, parseOrThrow } from "../services/outcome";
import { can } from "../services/permissions";
import { formatLocalDate } from "../services/time";
import { recordAudit, type Actor } from "./audit.server";
import { DESIGN_COLUMNS, designOf, requiredThicknessOf, type StoredDesign } from "./circuits.server";
import { enqueueNotification } from "./notifications.server";
import { lifePolicies, type LifePolicy } from "./owner-settings.server";

/**
 * Remaining life of circuits: recomputes the derived rows (circuit_life and cml_life, a new
 * version per circuit; earlier versions are kept) from approved readings, approved coupon
 * results, the circuit's design data and the owner's rate policy. Approved data is never
 * touched. Runs inside the caller's transaction (an approval computes in the approving
 * transaction).
 *
 * Set-wise: one query each for the circuits (locked), their CMLs with the latest
 * replacement, the approved readings, the approved coupon results, the previous current
 * versions and the owner's policy, whatever the number of circuits; the writes are
 * multi-row statements. "Today" is each site's own calendar day.
 *
 * An approval that puts CMLs below required thickness e-mails the owner's integrity
 * engineers at once: `recomputeCircuitLife` writes the message to the outbox itself when
 * the cause is "approval" (the approval only calls this function).
 */

export type LifeCause = "approval" | "recompute" | "design" | "policy" | "thresholds";

export type RecomputeRequest = {
  ownerId: string;
  /** The circuits to recompute; all of the owner's circuits when omitted. */
  circuitIds?: string[];
  cause: LifeCause;
  /** The approved submission that caused it (cause "approval"). */
  causeSubmissionId?: string | null;
  /** The recompute run that caused it (cause "recompute", "design", "policy", "thresholds"). */
  runId?: string | null;
  /** The computation's instant (defaults to now); each site's calendar day is taken from it. */
  now?: Date;
};

export type RecomputeOutcome = {
  circuits: number;
  /** CMLs that were not below required thickness before this computation and are now. */
  newlyBelowRequired: Array<{ circuitId: string; cmlId: string }>;
  /** The e-mails written to the outbox for them (cause "approval"). */
  outboxIds: string[];
};

type CircuitRow = StoredDesign & {
  id: string;
  tag: string;
  material_code: string;
  time_zone: string;
};
type CmlRow = {
  id: string;
  circuit_id: string;
  tag: string;
  injection_point: boolean;
  baseline_thickness_mm: string | null;
  baseline_on: string | null;
  replaced_on: string | null;
  replacement_baseline_mm: string | null;
};
type ReadingRow = { cml_id: string; measured_on: string; thickness_mm: number };
type CouponRow = {
  id: string;
  circuit_id: string;
  serial: string;
  material_code: string;
  removed_on: string;
  determinable: boolean | null;
  general_mm_y: number | null;
  pitting_mm_y: number | null;
};

const num = (v: string | number | null) => (v === null ? null : Number(v));

/** Recomputes the requested circuits of one owner: a new current version each. */
export async function recomputeCircuitLife(
  trx: Knex.Transaction,
  request: RecomputeRequest,
): Promise<RecomputeOutcome> {
  const { ownerId } = request;
  const now = request.now ?? new Date();
  if (request.circuitIds !== undefined && request.circuitIds.length === 0)
    return { circuits: 0, newlyBelowRequired: [], outboxIds: [] };
  const ids = request.circuitIds?.filter(isUuid);

  // The circuits, locked in id order (two computations of one circuit wait for each other).
  const { rows: circuits } = await trx.raw<{ rows: CircuitRow[] }>(
    `select c.id, c.tag, c.material_code, s.time_zone, ${DESIGN_COLUMNS.map((k) => `c.${k}`).join(", ")}
       from circuits c join sites s on s.id = c.site_id
      where s.owner_id = ? ${ids ? "and c.id = any(?::uuid[])" : ""}
      order by c.id
        for update of c`,
    ids ? [ownerId, ids] : [ownerId],
  );
  if (circuits.length === 0) return { circuits: 0, newlyBelowRequired: [], outboxIds: [] };
  const circuitIds = circuits.map((c) => c.id);

  // One after another: a transaction has one connection.
  const cmlResult = await trx.raw<{ rows: CmlRow[] }>(
    `select m.id, m.circuit_id, m.tag, m.injection_point, m.baseline_thickness_mm, to_char(m.baseline_on, 'YYYY-MM-DD') as baseline_on,
              to_char(r.replaced_on, 'YYYY-MM-DD') as replaced_on, r.baseline_thickness_mm as replacement_baseline_mm
         from cmls m
         left join lateral (select x.replaced_on, x.baseline_thickness_mm from cml_replacements x
                             where x.cml_id = m.id order by x.replaced_on desc limit 1) r on true
        where m.owner_id = ? and m.circuit_id = any(?::uuid[]) and m.retired_at is null
        order by m.circuit_id, m.tag`,
    [ownerId, circuitIds],
  );
  // One value per CML and day (the thinner, should two approved surveys share a day),
  // from the latest replacement on; superseded surveys are not 'approved'.
  const readingResult = await trx.raw<{ rows: ReadingRow[] }>(
    `select t.cml_id, to_char(t.measured_on, 'YYYY-MM-DD') as measured_on, min(t.thickness_mm)::float8 as thickness_mm
         from thickness_readings t
         join submissions s on s.id = t.submission_id and s.status = 'approved' and s.kind = 'thickness' and s.owner_id = ?
         join cmls m on m.id = t.cml_id and m.retired_at is null
        where m.circuit_id = any(?::uuid[])
          and t.measured_on >= coalesce((select max(x.replaced_on) from cml_replacements x where x.cml_id = m.id), '-infinity'::date)
        group by t.cml_id, t.measured_on
        order by t.cml_id, t.measured_on`,
    [ownerId, circuitIds],
  );
  const couponResult = await trx.raw<{ rows: CouponRow[] }>(
    `select e.id, p.circuit_id, k.serial, k.material_code,
              to_char((e.removed_at at time zone st.time_zone)::date, 'YYYY-MM-DD') as removed_on,
              (r.computed ->> 'determinable')::boolean as determinable,
              (r.computed -> 'rate' ->> 'mmPerYear')::float8 as general_mm_y,
              (r.computed -> 'pitting' ->> 'mmPerYear')::float8 as pitting_mm_y
         from coupon_results r
         join submissions s on s.id = r.submission_id and s.status = 'approved' and s.owner_id = ?
         join coupon_exposures e on e.id = r.exposure_id
         join coupons k on k.id = e.coupon_id
         join monitoring_points p on p.id = e.point_id
         join sites st on st.id = p.site_id
        where p.circuit_id = any(?::uuid[]) and e.removed_at is not null
          and e.removed_at > now() - interval '21 years'
        order by p.circuit_id, e.removed_at`,
    [ownerId, circuitIds],
  );
  const previousResult = await trx.raw<{
    rows: Array<{ id: string; circuit_id: string; version: number; below: string[] }>;
  }>(
    `select l.id, l.circuit_id, l.version,
              coalesce(array(select cl.cml_id::text from cml_life cl
                              where cl.circuit_life_id = l.id and cl.condition = 'below_required'), '{}') as below
         from circuit_life l
        where l.circuit_id = any(?::uuid[]) and l.current`,
    [circuitIds],
  );
  const policy = (await lifePolicies(trx, [ownerId])).get(ownerId) as LifePolicy;

  const cmlsOf = groupBy(cmlResult.rows, (r) => r.circuit_id);
  const readingsOf = groupBy(readingResult.rows, (r) => r.cml_id);
  const couponsOf = groupBy(couponResult.rows, (r) => r.circuit_id);
  const previous = new Map(previousResult.rows.map((r) => [r.circuit_id, r]));

  const lifeRows: Array<Record<string, unknown>> = [];
  const assessed: Array<{ circuitId: string; life: CircuitLife }> = [];
  for (const c of circuits) {
    const life = computeCircuit(c, cmlsOf.get(c.id) ?? [], readingsOf, couponsOf.get(c.id) ?? [], policy, now);
    assessed.push({ circuitId: c.id, life });
    lifeRows.push({
      owner_id: ownerId,
      circuit_id: c.id,
      version: (previous.get(c.id)?.version ?? 0) + 1,
      current: true,
      computed_at: now.toISOString(),
      cause: request.cause,
      cause_submission_id: request.causeSubmissionId ?? null,
      cause_run_id: request.runId ?? null,
      formula_version: life.basis.formulaVersion,
      condition: life.condition,
      required_thickness_mm: life.requiredMm,
      required_governed_by: life.requiredGovernedBy,
      governing_cml_id: life.governingCmlId,
      governing_rate_mm_y: life.governingRateMmPerYear,
      rate_source: life.rateSource,
      remaining_life_years: life.remainingLifeYears,
      remaining_life_conservative_years: life.remainingLifeConservativeYears,
      life_note: life.lifeNote,
      as_of: life.asOf,
      projected_required_on: life.projectedRequiredOn,
      next_inspection_on: life.nextInspection.dueOn,
      next_inspection_governed_by: life.nextInspection.governedBy,
      coupon_rates: JSON.stringify(life.couponRates),
      flags: JSON.stringify(life.flags),
      // The inputs kept with the figures: the design data as it stood, so the version can be
      // re-derived years later whatever the circuit says then.
      basis: JSON.stringify({ ...life.basis, design: designForApi(designOf(c)) }),
    });
  }

  const previousIds = previousResult.rows.map((r) => r.id);
  if (previousIds.length) await trx("circuit_life").whereIn("id", previousIds).update({ current: false });
  const inserted: Array<{ id: string; circuit_id: string }> = [];
  for (const chunk of chunks(lifeRows, 1000))
    inserted.push(...(await trx("circuit_life").insert(chunk).returning(["id", "circuit_id"])));
  const lifeIdOf = new Map(inserted.map((r) => [r.circuit_id, r.id]));

  const cmlRows: Array<Record<string, unknown>> = [];
  const newlyBelowRequired: RecomputeOutcome["newlyBelowRequired"] = [];
  for (const { circuitId, life } of assessed) {
    const before = new Set(previous.get(circuitId)?.below ?? []);
    for (const m of life.cmls) {
      if (m.condition === "below_required" && !before.has(m.id)) newlyBelowRequired.push({ circuitId, cmlId: m.id });
      cmlRows.push({
        circuit_life_id: lifeIdOf.get(circuitId),
        cml_id: m.id,
        condition: m.condition,
        readings_used: m.readingsUsed,
        last_measured_on: m.lastMeasuredOn,
        last_thickness_mm: m.lastThicknessMm,
        long_term_mm_y: m.longTermMmPerYear,
        short_term_mm_y: m.shortTermMmPerYear,
        regression_mm_y: m.regression?.mmPerYear ?? null,
        regression_upper_mm_y: m.regression?.upperMmPerYear ?? null,
        governing_rate_mm_y: m.governingRateMmPerYear,
        remaining_life_years: m.remainingLifeYears,
        remaining_life_conservative_years: m.remainingLifeConservativeYears,
        life_note: m.lifeNote,
        projected_required_on: m.projectedRequiredOn,
        next_inspection_on: m.nextInspection.dueOn,
        next_inspection_governed_by: m.nextInspection.governedBy,
        flags: JSON.stringify(m.flags),
        basis: JSON.stringify({
          ...m.basis,
          governingRate: m.governingRate,
          baselineUsed: m.baseline,
          regression: m.regression,
          nextInspectionNote: m.nextInspection.note,
          intervalYears: m.nextInspection.intervalYears,
          asOf: m.asOf,
          // the approved readings the figures came from (after the CML's latest replacement)
          readings: (readingsOf.get(m.id) ?? []).map((r) => ({
            date: r.measured_on,
            thicknessMm: Number(r.thickness_mm),
          })),
        }),
      });
    }
  }
  for (const chunk of chunks(cmlRows, 2000)) await trx("cml_life").insert(chunk);

  let outboxIds: string[] = [];
  if (request.cause === "approval" && newlyBelowRequired.length > 0)
    outboxIds = await enqueueNotification(trx, {
      kind: "life.below_required",
      ownerId,
      causeSubmissionId: request.causeSubmissionId ?? null,
      cmls: newlyBelowRequired.map((n) => ({ circuitLifeId: lifeIdOf.get(n.circuitId) as string, cmlId: n.cmlId })),
    });
  return { circuits: circuits.length, newlyBelowRequired, outboxIds };
}

function computeCircuit(
  c: CircuitRow,
  cmls: CmlRow[],
  readingsOf: Map<string, ReadingRow[]>,
  coupons: CouponRow[],
  policy: LifePolicy,
  now: Date,
): CircuitLife {
  const design = designOf(c);
  const required = requiredThicknessOf({ ...design, material_code: c.material_code });
  const today = formatLocalDate(now, c.time_zone);
  const missingReason =
    required.status === "missing"
      ? `design data missing: ${required.missing.join(", ")}`
      : required.status === "not-applicable"
        ? `required thickness cannot be computed: ${required.message}`
        : undefined;
  const pipingClass = (design.piping_class ?? null) as 1 | 2 | 3 | 4 | null;
  return assessCircuitLife({
    circuitMaterialCode: c.material_code,
    required:
      required.status === "ok"
        ? { requiredMm: required.requiredMm, governedBy: required.governedBy, reason: requiredReason(required) }
        : null,
    ...(missingReason ? { requiredMissingReason: missingReason } : {}),
    nominalWallMm: design.nominal_wall_mm,
    millTolerancePct: design.mill_tolerance_pct,
    pipingClass,
    policy: {
      policy: policy.ratePolicy,
      ...(policy.minimumRateMmPerYear !== null ? { minimumRateMmPerYear: policy.minimumRateMmPerYear } : {}),
    },
    ...(policy.maxIntervalYears !== null ? { maxIntervalYears: policy.maxIntervalYears } : {}),
    couponWindowYears: policy.couponWindowYears,
    couponRateBasis: policy.couponRateBasis,
    disagreementFactor: policy.rateDisagreementFactor,
    today,
    cmls: cmls.map((m) => {
      // A replacement starts a new base-line; readings before it were already left out.
      const replaced = m.replaced_on !== null;
      const readings: ThicknessReading[] = (readingsOf.get(m.id) ?? [])
        .filter((r) => r.measured_on <= today)
        .map((r) => ({ date: r.measured_on, thicknessMm: Number(r.thickness_mm) }));
      return {
        id: m.id,
        tag: m.tag,
        injectionPoint: m.injection_point,
        baseline: replaced
          ? { thicknessMm: num(m.replacement_baseline_mm), date: m.replaced_on }
          : { thicknessMm: num(m.baseline_thickness_mm), date: m.baseline_on },
        readings,
      };
    }),
    coupons: coupons.map((k): CouponRateInput => ({
      id: k.id,
      serial: k.serial,
      materialCode: k.material_code,
      removedOn: k.removed_on,
      determinable: k.determinable !== false && k.general_mm_y !== null,
      generalMmPerYear: k.general_mm_y,
      pittingMmPerYear: k.pitting_mm_y,
    })),
  });
}

function requiredReason(r: Extract<ReturnType<typeof requiredThicknessOf>, { status: "ok" }>): string {
  const pd = r.pressureDesignMm.toFixed(2);
  const sm = r.structuralMinimumMm.toFixed(2);
  if (r.governedBy === "pressure-design")
    return `Pressure design thickness ${pd} mm (ASME B31.3 eq. 3a) is not less than the structural minimum ${sm} mm.`;
  if (r.governedBy === "owner-minimum")
    return `The owner's structural minimum ${sm} mm exceeds the pressure design thickness ${pd} mm${r.ownerReason ? ` (${r.ownerReason})` : ""}.`;
  return `The API 574 structural minimum ${sm} mm for NPS ${r.nps} exceeds the pressure design thickness ${pd} mm (ASME B31.3 eq. 3a).`;
}

function groupBy<T>(rows: T[], key: (row: T) => string): Map<string, T[]> {
  const out = new Map<string, T[]>();
  for (const r of rows) {
    const k = key(r);
    const list = out.get(k);
    if (list) list.push(r);
    else out.set(k, [r]);
  }
  return out;
}

function chunks<T>(rows: T[], size: number): T[][] {
  const out: T[][] = [];
  for (let i = 0; i < rows.length; i += size) out.push(rows.slice(i, i + size));
  return out;
}

// ── Recompute runs ────────────────────────────────────────────────────────────

export type RecomputeTrigger = "button" | "command" | "policy" | "design" | "thresholds";
const CAUSE_OF: Record<RecomputeTrigger, LifeCause> = {
  button: "recompute",
  command: "recompute",
  policy: "policy",
  design: "design",
  thresholds: "thresholds",
};
/** Circuits per transaction of a run: short locks, and progress to show. */
export const RECOMPUTE_BATCH = 200;

let queuedListener: ((runIds: string[]) => unknown) | undefined;

/** The job queue registers here to start a queued run as soon as its transaction commits. */
export function onLifeRunQueued(listener: ((runIds: string[]) => unknown) | undefined): void {
  queuedListener = listener;
}

/**
 * Queues a recompute of every circuit of the owner: a life_recompute_runs row in the
 * caller's transaction (so it exists exactly when the change that caused it commits); the
 * queue starts it after the commit, and its minute sweep starts any run left queued.
 */
export async function queueLifeRecompute(
  conn: Db,
  run: { ownerId: string; trigger: RecomputeTrigger; reason: string; requestedBy: string | null },
): Promise<string> {
  const [row]: Array<{ id: string }> = await conn("life_recompute_runs")
    .insert({ owner_id: run.ownerId, trigger: run.trigger, reason: run.reason, requested_by: run.requestedBy })
    .returning("id");
  const listener = queuedListener;
  if (listener) {
    const start = () => void Promise.resolve(listener([row.id])).catch(() => undefined);
    if (!conn.isTransaction) start();
    else {
      let trx = conn as Knex.Transaction;
      while (trx.parentTransaction) trx = trx.parentTransaction;
      trx.executionPromise.then(start, () => undefined);
    }
  }
  return row.id;
}

const recomputeRequestSchema = z.object({ reason: requiredText("the reason", 300) });

/** The button's request: an engineer queues a recompute with a reason (audited when it finishes). */
export async function requestLifeRecompute(
  conn: Db,
  user: SessionUser & { ownerId: string },
  input: FormInput,
): Promise<{ runId: string }> {
  const { reason } = parseOrThrow(recomputeRequestSchema, input);
  const runId = await queueLifeRecompute(conn, {
    ownerId: user.ownerId,
    trigger: "button",
    reason,
    requestedBy: user.id,
  });
  return { runId };
}

export type LifeRunRow = {
  id: string;
  trigger: RecomputeTrigger;
  reason: string;
  state: "queued" | "running" | "done" | "failed";
  circuits_total: number | null;
  circuits_done: number;
  created_at: string;
  started_at: string | null;
  finished_at: string | null;
  error: string | null;
  requested_by_name: string | null;
};

/** The owner's latest runs, newest first. */
export async function lifeRuns(conn: Db, ownerId: string, limit = 5): Promise<LifeRunRow[]> {
  const rows: LifeRunRow[] = await conn("life_recompute_runs as r")
    .leftJoin("users as u", "u.id", "r.requested_by")
    .where("r.owner_id", ownerId)
    .orderBy("r.created_at", "desc")
    .limit(limit)
    .select(
      "r.id",
      "r.trigger",
      "r.reason",
      "r.state",
      "r.circuits_total",
      "r.circuits_done",
      "r.created_at",
      "r.started_at",
      "r.finished_at",
      "r.error",
      "u.name as requested_by_name",
    );
  return rows.map((r) => ({
    ...r,
    created_at: new Date(r.created_at).toISOString(),
    started_at: r.started_at && new Date(r.started_at).toISOString(),
    finished_at: r.finished_at && new Date(r.finished_at).toISOString(),
  }));
}

/** A run "running" this long has lost its worker (a process that died mid-run): it is queued again. */
const ABANDONED_RUN_MINUTES = 15;

/**
 * Runs still queued a minute after they were created (a commit whose kick was lost, a restart),
 * and runs whose worker died mid-run, which go back to the queue (a recompute only adds
 * versions of derived rows, so running it again is safe).
 */
export async function lifeRunsLeftBehind(conn: Db): Promise<string[]> {
  const abandoned: Array<{ id: string }> = await conn("life_recompute_runs")
    .where("state", "running")
    .andWhere("started_at", "<", conn.raw(`now() - interval '${ABANDONED_RUN_MINUTES} minutes'`))
    .update({ state: "queued", started_at: null, circuits_done: 0 })
    .returning("id");
  const rows: Array<{ id: string }> = await conn("life_recompute_runs")
    .where("state", "queued")
    .andWhere("created_at", "<", conn.raw("now() - interval '1 minute'"))
    .orderBy("created_at")
    .limit(100)
    .select("id");
  return [...new Set([...abandoned.map((r) => r.id), ...rows.map((r) => r.id)])];
}

/**
 * The worker: runs one queued recompute — every circuit of the owner in batches of
 * RECOMPUTE_BATCH, one transaction each, the progress written after each — and records
 * `life.recomputed` in the owner's audit trail. A run that is not queued (already taken by
 * another worker, or finished) is left alone. Returns the counts.
 */
export async function runLifeRecompute(
  conn: Knex,
  runId: string,
): Promise<{ state: "done" | "failed" | "skipped"; circuits: number; belowRequired: number; seconds: number }> {
  const started = Date.now();
  const [run]: Array<{
    id: string;
    owner_id: string;
    trigger: RecomputeTrigger;
    reason: string;
    requested_by: string | null;
  }> = await conn("life_recompute_runs")
    .where({ id: runId, state: "queued" })
    .update({ state: "running", started_at: conn.fn.now() })
    .returning(["id", "owner_id", "trigger", "reason", "requested_by"]);
  if (!run) return { state: "skipped", circuits: 0, belowRequired: 0, seconds: 0 };
  try {
    const circuitIds: string[] = (
      await conn("circuits as c")
        .join("sites as s", "s.id", "c.site_id")
        .where("s.owner_id", run.owner_id)
        .orderBy("c.id")
        .select("c.id")
    ).map((r: { id: string }) => r.id);
    await conn("life_recompute_runs").where({ id: runId }).update({ circuits_total: circuitIds.length });
    let done = 0;
    let belowRequired = 0;
    const now = new Date();
    for (const batch of chunks(circuitIds, RECOMPUTE_BATCH)) {
      await conn.transaction(async (trx) => {
        const r = await recomputeCircuitLife(trx, {
          ownerId: run.owner_id,
          circuitIds: batch,
          cause: CAUSE_OF[run.trigger],
          runId,
          now,
        });
        done += r.circuits;
        await trx("life_recompute_runs").where({ id: runId }).update({ circuits_done: done });
      });
    }
    const below: { n: number } | undefined = await conn("circuit_life")
      .where({ owner_id: run.owner_id, current: true, condition: "below_required" })
      .first(conn.raw("count(*)::int as n"));
    belowRequired = below?.n ?? 0;
    const seconds = (Date.now() - started) / 1000;
    await conn.transaction(async (trx) => {
      await trx("life_recompute_runs")
        .where({ id: runId })
        .update({ state: "done", finished_at: trx.fn.now(), circuits_done: done });
      await recordAudit(trx, {
        ownerId: run.owner_id,
        actor: await actorOfRun(trx, run.requested_by, run.trigger),
        action: "life.recomputed",
        recordType: "life_recompute_run",
        recordId: runId,
        after: { trigger: run.trigger, circuits: done, belowRequired, seconds: Number(seconds.toFixed(1)) },
        reason: run.reason,
      });
    });
    return { state: "done", circuits: done, belowRequired, seconds };
  } catch (error) {
    const message = (error as Error).message.slice(0, 1000);
    await conn.transaction(async (trx) => {
      await trx("life_recompute_runs")
        .where({ id: runId })
        .update({ state: "failed", finished_at: trx.fn.now(), error: message });
      // A failed run is on the record too: who asked, why, and that it did not finish.
      await recordAudit(trx, {
        ownerId: run.owner_id,
        actor: await actorOfRun(trx, run.requested_by, run.trigger),
        action: "life.recompute_failed",
        recordType: "life_recompute_run",
        recordId: runId,
        after: { trigger: run.trigger, error: message },
        reason: run.reason,
      });
    });
    throw error;
  }
}

async function actorOfRun(trx: Db, userId: string | null, trigger: RecomputeTrigger): Promise<Actor> {
  if (userId) {
    const u: { id: string; email: string; organisation_id: string } | undefined = await trx("users")
      .where({ id: userId })
      .first("id", "email", "organisation_id");
    if (u) return { userId: u.id, organisationId: u.organisation_id, label: u.email };
  }
  return { userId: null, organisationId: null, label: trigger === "command" ? "npm run life:recompute" : "Wallcast" };
}

// ── Reads for screens and the API ─────────────────────────────────────────────

type SummaryRow = {
  id: string;
  tag: string;
  description: string;
  material_code: string;
  site_id: string;
  site_code: string;
  site_name: string;
  time_zone: string;
  unit_tag: string;
  version: number | null;
  computed_at: string | null;
  condition: LifeCondition | null;
  required_thickness_mm: string | null;
  required_governed_by: string | null;
  governing_rate_mm_y: number | null;
  rate_source: string | null;
  remaining_life_years: number | null;
  remaining_life_conservative_years: number | null;
  life_note: string | null;
  as_of: string | null;
  projected_required_on: string | null;
  next_inspection_on: string | null;
  next_inspection_governed_by: string | null;
  governing_cml_tag: string | null;
};

export type CircuitLifeSummary = ReturnType<typeof summaryOf>;

const finiteOrNull = (v: number | null) => (v === null || !Number.isFinite(Number(v)) ? null : Number(v));

function summaryOf(r: SummaryRow, now: Date) {
  const condition: LifeCondition = r.condition ?? "no_data";
  const status = lifeStatus({ condition, nextInspectionOn: r.next_inspection_on }, formatLocalDate(now, r.time_zone));
  const life = finiteOrNull(r.remaining_life_years);
  const conservative = finiteOrNull(r.remaining_life_conservative_years);
  return {
    id: r.id,
    tag: r.tag,
    description: r.description,
    material: r.material_code,
    site: { id: r.site_id, code: r.site_code, name: r.site_name },
    unitTag: r.unit_tag,
    condition,
    status: { code: status.code, words: status.words },
    requiredThicknessMm: num(r.required_thickness_mm),
    requiredGovernedBy: r.required_governed_by,
    governingCmlTag: r.governing_cml_tag,
    governingRateMmPerYear: finiteOrNull(r.governing_rate_mm_y),
    rateSource: r.rate_source,
    remainingLifeYears: life,
    remainingLifeConservativeYears: conservative,
    remainingLifeReason:
      life === null && conservative === null
        ? (r.life_note ?? "The remaining life has not been computed yet.")
        : r.life_note,
    asOf: r.as_of,
    projectedRequiredOn: r.projected_required_on,
    nextInspectionOn: r.next_inspection_on,
    nextInspectionGovernedBy: r.next_inspection_governed_by,
    version: r.version,
    computedAt: r.computed_at ? new Date(r.computed_at).toISOString() : null,
  };
}

const summarySelect = `
  select c.id, c.tag, c.description, c.material_code, s.id as site_id, s.code as site_code, s.name as site_name,
         s.time_zone, u.tag as unit_tag, l.version, l.computed_at, l.condition, l.required_thickness_mm,
         l.required_governed_by, l.governing_rate_mm_y, l.rate_source, l.remaining_life_years,
         l.remaining_life_conservative_years, l.life_note, to_char(l.as_of, 'YYYY-MM-DD') as as_of,
         to_char(l.projected_required_on, 'YYYY-MM-DD') as projected_required_on,
         to_char(l.next_inspection_on, 'YYYY-MM-DD') as next_inspection_on, l.next_inspection_governed_by,
         gm.tag as governing_cml_tag
    from circuits c
    join sites s on s.id = c.site_id
    join process_units u on u.id = c.unit_id
    left join circuit_life l on l.circuit_id = c.id and l.current
    left join cmls gm on gm.id = l.governing_cml_id`;

/** Owner staff only; anyone else is told there is nothing here. */
export function ownerOf(user: Reader): string {
  if (isApiClient(user)) return user.organisation.id;
  if (user.organisation.kind !== "owner" || !can(user, "readOwnerData")) throw new NotFoundInTenant("circuit");
  return user.organisation.id;
}

/**
 * A page of the owner's circuits with their current remaining life, ordered by id
 * (keyset: `cursor` is the last circuit id handed out). `siteId` narrows to one site.
 */
export async function circuitLifePage(
  conn: Db,
  user: Reader,
  page: { siteId?: string; cursor?: string; limit: number },
  now = new Date(),
): Promise<{ items: CircuitLifeSummary[]; nextCursor: string | null }> {
  const ownerId = ownerOf(user);
  const where: string[] = ["s.owner_id = ?"];
  const bindings: Array<string | number> = [ownerId];
  if (page.siteId !== undefined) {
    where.push("c.site_id = ?");
    bindings.push(page.siteId);
  }
  if (page.cursor !== undefined) {
    where.push("c.id > ?");
    bindings.push(page.cursor);
  }
  bindings.push(page.limit + 1);
  const { rows } = await conn.raw<{ rows: SummaryRow[] }>(
    `${summarySelect} where ${where.join(" and ")} order by c.id limit ?`,
    bindings,
  );
  const more = rows.length > page.limit;
  const items = rows.slice(0, page.limit).map((r) => summaryOf(r, now));
  return { items, nextCursor: more ? items[items.length - 1].id : null };
}

/** Whether the cursor is one of the owner's circuits (a cursor this endpoint handed out). */
export async function isOwnCircuit(conn: Db, user: Reader, circuitId: string): Promise<boolean> {
  const ownerId = ownerOf(user);
  if (!isUuid(circuitId)) return false;
  const row = await conn("circuits as c")
    .join("sites as s", "s.id", "c.site_id")
    .where({ "c.id": circuitId, "s.owner_id": ownerId })
    .first("c.id");
  return Boolean(row);
}

type CmlLifeRow = {
  cml_id: string;
  tag: string;
  location: string;
  component: string;
  injection_point: boolean;
  condition: LifeCondition;
  readings_used: number;
  last_measured_on: string | null;
  last_thickness_mm: string | null;
  long_term_mm_y: number | null;
  short_term_mm_y: number | null;
  regression_mm_y: number | null;
  regression_upper_mm_y: number | null;
  governing_rate_mm_y: number | null;
  remaining_life_years: number | null;
  remaining_life_conservative_years: number | null;
  life_note: string | null;
  projected_required_on: string | null;
  next_inspection_on: string | null;
  next_inspection_governed_by: string | null;
  flags: unknown;
  basis: unknown;
};

/** The design data as the API writes names: camelCase with the unit in the name, as everywhere else in /api/v1. */
function designForApi(d: ReturnType<typeof designOf>) {
  return {
    nps: d.nps,
    schedule: d.schedule,
    outsideDiameterMm: d.outside_diameter_mm,
    outsideDiameterFromTable: d.outside_diameter_from_table,
    nominalWallMm: d.nominal_wall_mm,
    nominalWallFromTable: d.nominal_wall_from_table,
    millTolerancePct: d.mill_tolerance_pct,
    designPressureMPa: d.design_pressure_mpa,
    designTemperatureC: d.design_temperature_c,
    allowableStressMPa: d.allowable_stress_mpa,
    jointFactorE: d.joint_factor_e,
    weldFactorW: d.weld_factor_w,
    yCoefficient: d.y_coefficient,
    corrosionAllowanceMm: d.corrosion_allowance_mm,
    structuralMinimumMm: d.structural_minimum_mm,
    structuralMinimumReason: d.structural_minimum_reason,
    pipingClass: d.piping_class,
  };
}

/**
 * One circuit's remaining life in full: design data, required thickness and what governed
 * it, each CML's figures, the coupon rates, flags, the basis, version and computed time,
 * the status judged today, and the caution.
 */
export async function circuitLifeDetail(conn: Db, user: Reader, circuitId: string, now = new Date()) {
  const ownerId = ownerOf(user);
  if (!isUuid(circuitId)) throw new NotFoundInTenant("circuit");
  const { rows } = await conn.raw<{
    rows: Array<
      SummaryRow & StoredDesign & { life_id: string | null; coupon_rates: unknown; flags: unknown; basis: unknown }
    >;
  }>(
    `${summarySelect.replace(
      "gm.tag as governing_cml_tag",
      `gm.tag as governing_cml_tag, l.id as life_id, l.coupon_rates, l.flags, l.basis, ${DESIGN_COLUMNS.map((k) => `c.${k}`).join(", ")}`,
    )} where s.owner_id = ? and c.id = ?`,
    [ownerId, circuitId],
  );
  const row = rows[0];
  if (!row) throw new NotFoundInTenant("circuit");
  const design = designOf(row);
  const required = requiredThicknessOf({ ...design, material_code: row.material_code });
  const cmls = row.life_id
    ? (
        await conn.raw<{ rows: CmlLifeRow[] }>(
          `select l.cml_id, m.tag, m.location, m.component, m.injection_point, l.condition, l.readings_used,
                  to_char(l.last_measured_on, 'YYYY-MM-DD') as last_measured_on, l.last_thickness_mm,
                  l.long_term_mm_y, l.short_term_mm_y, l.regression_mm_y, l.regression_upper_mm_y, l.governing_rate_mm_y,
                  l.remaining_life_years, l.remaining_life_conservative_years, l.life_note,
                  to_char(l.projected_required_on, 'YYYY-MM-DD') as projected_required_on,
                  to_char(l.next_inspection_on, 'YYYY-MM-DD') as next_inspection_on, l.next_inspection_governed_by,
                  l.flags, l.basis
             from cml_life l join cmls m on m.id = l.cml_id
            where l.circuit_life_id = ?
            order by m.tag`,
          [row.life_id],
        )
      ).rows
    : [];
  const today = formatLocalDate(now, row.time_zone);
  return {
    ...summaryOf(row, now),
    design: designForApi(design),
    // The design data as it stands now, and the required thickness it gives; the life figures
    // above were computed with `requiredThicknessMm` as stored in this version (its basis says
    // from what), which differs only until the recompute a design change queues has run.
    requiredThicknessNow: required,
    cmls: cmls.map((m) => {
      const life = finiteOrNull(m.remaining_life_years);
      const conservative = finiteOrNull(m.remaining_life_conservative_years);
      const status = lifeStatus({ condition: m.condition, nextInspectionOn: m.next_inspection_on }, today);
      return {
        id: m.cml_id,
        tag: m.tag,
        location: m.location,
        component: m.component,
        injectionPoint: m.injection_point,
        condition: m.condition,
        status,
        readingsUsed: m.readings_used,
        lastMeasuredOn: m.last_measured_on,
        lastThicknessMm: num(m.last_thickness_mm),
        longTermMmPerYear: finiteOrNull(m.long_term_mm_y),
        shortTermMmPerYear: finiteOrNull(m.short_term_mm_y),
        regressionMmPerYear: finiteOrNull(m.regression_mm_y),
        regressionUpperMmPerYear: finiteOrNull(m.regression_upper_mm_y),
        governingRateMmPerYear: finiteOrNull(m.governing_rate_mm_y),
        remainingLifeYears: life,
        remainingLifeConservativeYears: conservative,
        remainingLifeReason: m.life_note,
        asOf: m.last_measured_on,
        projectedRequiredOn: m.projected_required_on,
        nextInspectionOn: m.next_inspection_on,
        nextInspectionGovernedBy: m.next_inspection_governed_by,
        flags: m.flags,
        basis: m.basis,
      };
    }),
    couponRates: row.coupon_rates ?? null,
    flags: row.flags ?? [],
    basis: row.basis ?? null,
    statusWords: LIFE_STATUS_WORDS,
    caution: CAUTION,
  };
}

/** The stored versions of one circuit's remaining life, newest first. */
export async function circuitLifeVersions(conn: Db, user: Reader, circuitId: string) {
  const ownerId = ownerOf(user);
  if (!isUuid(circuitId)) throw new NotFoundInTenant("circuit");
  const rows: Array<{
    version: number;
    current: boolean;
    computed_at: string;
    cause: LifeCause;
    condition: LifeCondition;
    remaining_life_years: number | null;
    next_inspection_on: string | null;
    formula_version: string;
  }> = await conn("circuit_life")
    .where({ owner_id: ownerId, circuit_id: circuitId })
    .orderBy("version", "desc")
    .select(
      "version",
      "current",
      "computed_at",
      "cause",
      "condition",
      "remaining_life_years",
      conn.raw("to_char(next_inspection_on, 'YYYY-MM-DD') as next_inspection_on"),
      "formula_version",
    );
  return rows.map((r) => ({ ...r, computed_at: new Date(r.computed_at).toISOString() }));
}
