import { textProblem } from "../services/form-fields";
import type { Knex } from "knex";
import type { SessionUser } from "../context";
import type { Db } from "../services/db.server";
import { actorOf, recordAudit } from "./audit.server";
import { Conflict, Forbidden, Invalid, type FieldErrors } from "../services/outcome";
import { readAcknowledgements, warningsToAcknowledge, type Acknowledgement } from "../services/review-rules";
import { attachmentsForExposures } from "./attachments.server";
import { ownerSettings } from "./owner-settings.server";
import { can } from "../services/permissions";
import { getSubmission, type SubmissionSummary } from "./submissions.server";
import { enqueueNotification } from "./notifications.server";
import { recomputeCircuitLife } from "./circuit-life.server";
import { copySurveyInto, surveyCircuitIds, type StoredFlag } from "./survey-review.server";

/**
 * The owner's review of contractors' submissions: approve or return with a comment, with
 * optimistic concurrency (two engineers deciding at once cannot both win), and
 * corrections of approved submissions that supersede them once approved themselves.
 * Only integrity engineers decide; the database keeps approved results immutable.
 */

export type Decision = {
  decision: "approve" | "return";
  version: number;
  comment: string;
  /** The form's values: a reason per warning (`ack.<key>`), read only when approving. */
  acknowledgements?: Readonly<Record<string, string | undefined>>;
  /** The engineer ticked that approval makes the results permanent (required to approve). */
  confirmed?: boolean;
};

function requireEngineer(user: SessionUser) {
  if (!can(user, "decideSubmissions") || user.organisation.kind !== "owner") {
    throw new Forbidden("Only the owner's integrity engineers approve, return or correct submissions.");
  }
}

/** The circuits of the points whose coupons a submission holds. */
async function couponCircuitIds(trx: Knex.Transaction, submissionId: string): Promise<string[]> {
  const rows: Array<{ circuit_id: string }> = await trx("coupon_results as r")
    .join("coupon_exposures as e", "e.id", "r.exposure_id")
    .join("monitoring_points as p", "p.id", "e.point_id")
    .where("r.submission_id", submissionId)
    .distinct("p.circuit_id");
  return rows.map((r) => r.circuit_id);
}

export async function decide(
  conn: Knex,
  user: SessionUser,
  submissionId: string,
  d: Decision,
  requestId?: string,
): Promise<{ submission: SubmissionSummary }> {
  requireEngineer(user);
  const comment = d.comment.trim();
  const errors: FieldErrors = {};
  if (d.decision === "return" && comment.length < 3)
    errors.comment = "Say what the contractor must change: a comment is required to return a submission.";
  if (comment.length > 4000) errors.comment = "Keep the comment under 4000 characters.";
  else {
    const problem = textProblem(comment, "the comment", true);
    if (problem) errors.comment ??= problem;
  }
  return conn.transaction(async (trx) => {
    const detail = await getSubmission(trx, user, submissionId); // tenant check: NotFound for foreign ids
    const { submission } = detail;
    const status = d.decision === "approve" ? "approved" : "returned";
    let acknowledgements: Acknowledgement[] = [];
    if (status === "approved" && submission.status === "submitted" && submission.version === d.version) {
      // Every warning is answered with a reason, and the engineer confirms what becomes permanent.
      let warnings;
      if (detail.kind === "coupon") {
        const { results } = detail;
        const settings = await ownerSettings(trx, submission.ownerId);
        const files = await attachmentsForExposures(
          trx,
          user,
          results.map((r) => r.exposureId),
        );
        const exposureOf = new Map(results.map((r) => [r.id, r.exposureId]));
        warnings = warningsToAcknowledge({
          kind: "coupon",
          results,
          attachmentsOf: (id) => files[exposureOf.get(id) ?? ""] ?? [],
          photosRequired: settings.photosRequired,
        });
      } else warnings = warningsToAcknowledge({ kind: "thickness", readings: detail.readings });
      const read = readAcknowledgements(warnings, d.acknowledgements ?? {});
      if (read.ok) acknowledgements = read.acknowledgements;
      else Object.assign(errors, read.errors);
      if (!d.confirmed) errors.confirm = "Tick to confirm that these results become permanent once approved.";
    }
    if (Object.keys(errors).length) throw new Invalid(errors);
    // The compare-and-set: only the version the engineer looked at, and only while submitted.
    const changed = await trx("submissions")
      .where({ id: submissionId, version: d.version, status: "submitted" })
      .update({
        status,
        decided_at: trx.fn.now(),
        decided_by: user.id,
        decision_comment: comment || null,
        version: trx.raw("version + 1"),
        updated_at: trx.fn.now(),
      })
      .returning(["id", "supersedes_id", "decided_at"]);
    if (changed.length === 0) {
      const { submission: current } = await getSubmission(trx, user, submissionId);
      const who = current.decidedAt ? ` It was ${current.status} at ${current.decidedAt}.` : "";
      throw new Conflict(
        current.status === "submitted"
          ? `Submission ${current.reference} changed while you were looking at it (now version ${current.version}). Reload to see the current state.`
          : `Submission ${current.reference} is already ${current.status}; your decision was not recorded.${who}`,
        { ...current },
      );
    }
    await trx("submission_revisions")
      .where({ submission_id: submissionId, revision: submission.revision })
      .update({
        decision: status,
        decision_comment: comment || null,
        decided_by: user.id,
        decided_at: changed[0].decided_at,
        acknowledgements: status === "approved" ? JSON.stringify(acknowledgements) : null,
      });
    const supersedes = changed[0].supersedes_id as string | null;
    // Superseded first, so the life computation below reads only the correction's readings.
    if (status === "approved" && supersedes) {
      await trx("submissions")
        .where({ id: supersedes, status: "approved" })
        .update({ status: "superseded", superseded_at: trx.fn.now() });
      await recordAudit(trx, {
        ownerId: submission.ownerId,
        actor: actorOf(user),
        action: "submission.superseded",
        recordType: "submission",
        recordId: supersedes,
        before: { status: "approved" },
        after: { status: "superseded", by: submissionId },
        requestId,
      });
    }
    await recordAudit(trx, {
      ownerId: submission.ownerId,
      actor: actorOf(user),
      action: status === "approved" ? "submission.approved" : "submission.returned",
      recordType: "submission",
      recordId: submissionId,
      before: { status: "submitted", version: d.version },
      after: {
        status,
        revision: submission.revision,
        comment: comment || null,
        ...(acknowledgements.length
          ? { acknowledged: acknowledgements.map((a) => `${a.label} · ${a.code}: ${a.reason}`) }
          : {}),
      },
      reason: comment || null,
      requestId,
    });
    if (status === "approved") {
      // The circuits' remaining life moves with the approval, in the same transaction: a survey's
      // readings, or coupon rates (beside the thickness rate, or a circuit's coupon-based estimate).
      await recomputeCircuitLife(trx, {
        ownerId: submission.ownerId,
        circuitIds:
          detail.kind === "thickness"
            ? await surveyCircuitIds(trx, submissionId)
            : await couponCircuitIds(trx, submissionId),
        cause: "approval",
        causeSubmissionId: submissionId,
      });
    }
    const { submission: after } = await getSubmission(trx, user, submissionId);
    await enqueueNotification(trx, {
      kind: status === "approved" ? "submission.approved" : "submission.returned",
      submissionId,
      actorUserId: user.id,
    });
    return { submission: after };
  });
}

/**
 * Reopens an approved submission as a correction: a new revision (same reference) that the
 * contractor edits and resubmits; the approved submission stays in force until the
 * correction is approved, then shows as superseded with this reason.
 */
export async function openCorrection(
  conn: Knex,
  user: SessionUser,
  submissionId: string,
  reason: string,
  requestId?: string,
): Promise<{ correctionId: string }> {
  requireEngineer(user);
  const why = reason.trim();
  if (why.length < 3) throw new Invalid({ reason: "Give the reason for the correction; it stays on the record." });
  const whyProblem = textProblem(why, "the reason", true);
  if (whyProblem) throw new Invalid({ reason: whyProblem });
  return conn.transaction(async (trx) => {
    const { submission } = await getSubmission(trx, user, submissionId);
    if (submission.status !== "approved") {
      throw new Invalid({
        reason: `Only an approved submission can be corrected; ${submission.reference} is ${submission.status}.`,
      });
    }
    const open = await trx("submissions")
      .where({ supersedes_id: submissionId })
      .whereNotIn("status", ["approved", "superseded"])
      .first("id");
    if (open) throw new Invalid({ reason: "A correction of this submission is already open." });
    const [row] = await trx("submissions")
      .insert({
        owner_id: submission.ownerId,
        site_id: submission.siteId,
        contractor_id: submission.contractorId,
        kind: submission.kind,
        status: "returned",
        revision: submission.revision + 1,
        reference: submission.reference,
        created_by: user.id,
        supersedes_id: submissionId,
        correction_reason: why,
        correction_opened_by: user.id,
        decision_comment: `Correction opened: ${why}`,
        worst_severity: submission.worstSeverity,
        flag_count: submission.flagCount,
      })
      .returning("id");
    if (submission.kind === "thickness") await copySurveyInto(trx, submissionId, row.id);
    else
      await trx.raw(
        `insert into coupon_results (submission_id, exposure_id, cleaning_method, coupon_masses_g, blank_initial_mass_g, blank_masses_g,
              base_metal_from_cycle, final_mass_g, pit_depths_mm, lab_notes, inputs, computed, flags, general_severity, pitting_severity)
       select ?, exposure_id, cleaning_method, coupon_masses_g, blank_initial_mass_g, blank_masses_g,
              base_metal_from_cycle, final_mass_g, pit_depths_mm, lab_notes, inputs, computed, flags, general_severity, pitting_severity
         from coupon_results where submission_id = ?`,
        [row.id, submissionId],
      );
    await recordAudit(trx, {
      ownerId: submission.ownerId,
      actor: actorOf(user),
      action: "submission.correction_opened",
      recordType: "submission",
      recordId: row.id,
      before: { corrects: submissionId, status: "approved" },
      after: { status: "returned", revision: submission.revision + 1 },
      reason: why,
      requestId,
    });
    await enqueueNotification(trx, {
      kind: "submission.correction_opened",
      submissionId: row.id,
      actorUserId: user.id,
    });
    return { correctionId: row.id as string };
  });
}

/** A coupon result as kept with a revision. */
export type CouponSnapshot = {
  exposure_id: string;
  inputs: { lab: Record<string, unknown> };
  computed: {
    rate: { mmPerYear: number } | null;
    severity: { worst: string | null };
    pitting: { mmPerYear: number } | null;
  };
};

/** A thickness reading as kept with a revision (one per reading, ordered by CML tag). */
export type ReadingSnapshot = {
  cml_id: string;
  cml_tag: string;
  circuit_tag: string;
  measured_on: string;
  thickness_mm: number;
  quadrant_readings_mm: number[];
  method: string;
  instrument: string;
  instrument_resolution_mm: number | null;
  technician: string;
  notes: string;
  flags: StoredFlag[];
};

type RevisionCommon = {
  submissionId: string;
  revision: number;
  submittedAt: string;
  decision: string | null;
  decisionComment: string | null;
  decidedAt: string | null;
  decidedByName: string | null;
  submittedByName: string | null;
  /** The contractor's reply to the previous return, sent with this revision. */
  reply: string | null;
  /** Warnings acknowledged when this revision was approved. */
  acknowledgements: Acknowledgement[] | null;
};

export type RevisionEntry = RevisionCommon &
  (
    | {
        kind: "coupon";
        /** Files held when submitted; null for revisions kept before files were recorded with them. */
        attachments: Array<{ id: string; exposureId: string; kind: string; name: string; sha256: string }> | null;
        results: CouponSnapshot[];
      }
    | {
        kind: "thickness";
        attachments: Array<{ id: string; submissionId: string; kind: string; name: string; sha256: string }> | null;
        results: ReadingSnapshot[];
      }
  );

/** Acknowledgements kept before they named their subject in words carry the coupon serial only. */
function acknowledgementsOf(kept: unknown): Acknowledgement[] | null {
  if (!Array.isArray(kept)) return null;
  return kept.map((a: Acknowledgement & { coupon?: string }) => {
    const label = a.label ?? a.coupon ?? "";
    return {
      key: a.key,
      resultId: a.resultId,
      label,
      subject: a.subject ?? `coupon ${label}`,
      code: a.code,
      message: a.message,
      reason: a.reason,
    };
  });
}

/** Every submitted revision of this submission and of the submissions it corrects, oldest first. */
export async function revisionHistory(conn: Db, user: SessionUser, submissionId: string): Promise<RevisionEntry[]> {
  const { submission } = await getSubmission(conn, user, submissionId);
  const chain = await conn.raw<{
    rows: Array<{
      submission_id: string;
      revision: number;
      submitted_at: Date;
      decision: string | null;
      decision_comment: string | null;
      decided_at: Date | null;
      decided_by_name: string | null;
      submitted_by_name: string | null;
      reply: string | null;
      attachments: unknown;
      acknowledgements: unknown;
      results: unknown;
    }>;
  }>(
    `with recursive chain(id) as (
        select id from submissions where id = ? and owner_id = ?
        union select s.supersedes_id from submissions s join chain c on s.id = c.id where s.supersedes_id is not null)
     select r.submission_id, r.revision, r.submitted_at, r.decision, r.decision_comment, r.decided_at, r.results,
            r.reply, r.attachments, r.acknowledgements,
            coalesce(nullif(d.name, ''), d.email) as decided_by_name,
            coalesce(nullif(u.name, ''), u.email) as submitted_by_name
       from submission_revisions r join chain c on c.id = r.submission_id
       left join users d on d.id = r.decided_by
       left join users u on u.id = r.submitted_by
      order by r.revision`,
    [submissionId, submission.ownerId],
  );
  return chain.rows.map((r) => {
    const common: RevisionCommon = {
      submissionId: r.submission_id,
      revision: r.revision,
      submittedAt: new Date(r.submitted_at).toISOString(),
      decision: r.decision,
      decisionComment: r.decision_comment,
      decidedAt: r.decided_at ? new Date(r.decided_at).toISOString() : null,
      decidedByName: r.decided_by_name,
      submittedByName: r.submitted_by_name,
      reply: r.reply,
      acknowledgements: acknowledgementsOf(r.acknowledgements),
    };
    // A correction keeps the kind of the submission it corrects, so the chain has one kind.
    return submission.kind === "thickness"
      ? {
          ...common,
          kind: "thickness" as const,
          attachments: r.attachments as Extract<RevisionEntry, { kind: "thickness" }>["attachments"],
          results: (r.results ?? []) as ReadingSnapshot[],
        }
      : {
          ...common,
          kind: "coupon" as const,
          attachments: r.attachments as Extract<RevisionEntry, { kind: "coupon" }>["attachments"],
          results: (r.results ?? []) as CouponSnapshot[],
        };
  });
}

/** One change between revisions of a coupon submission, per coupon. */
export type Change = { coupon: string; field: string; before: string; after: string };
/** One change between revisions of a thickness survey, per CML (or file). */
export type SurveyChange = { cml: string; field: string; before: string; after: string };

const labFieldLabels: Record<string, string> = {
  cleaningMethod: "cleaning method",
  couponMassesG: "coupon masses after cleaning, g",
  finalMassG: "final mass, g",
  blankInitialMassG: "blank mass before cleaning, g",
  blankMassesG: "blank masses after cleaning, g",
  baseMetalFromCycle: "cleaning-curve base-metal cycle",
  pitDepthsMm: "pit depths, mm",
  labNotes: "lab notes",
};

const show = (v: unknown) =>
  v === null || v === undefined || v === "" ? "—" : Array.isArray(v) ? v.join(", ") : String(v);

const fileKindWords: Record<string, string> = {
  as_removed: "as-removed photo",
  after_cleaning: "after-cleaning photo",
  lab_sheet: "lab sheet",
  survey_sheet: "survey sheet",
  survey_photo: "survey photo",
  instrument_export: "instrument export",
};
const fileWords = (kind: string) => fileKindWords[kind] ?? `${kind.replace(/_/g, " ")} file`;

/**
 * What changed between two revisions: per coupon, the lab inputs and the resulting rate
 * and severity; per CML of a survey, the reading's fields and its flags (readings added
 * or removed); and the files, when both revisions recorded theirs.
 */
export function diffRevisions(
  before: Extract<RevisionEntry, { kind: "coupon" }>,
  after: Extract<RevisionEntry, { kind: "coupon" }>,
  serialOf: (exposureId: string) => string,
): Change[];
export function diffRevisions(
  before: Extract<RevisionEntry, { kind: "thickness" }>,
  after: Extract<RevisionEntry, { kind: "thickness" }>,
): SurveyChange[];
export function diffRevisions(
  before: RevisionEntry,
  after: RevisionEntry,
  serialOf?: (exposureId: string) => string,
): Change[] | SurveyChange[];
export function diffRevisions(
  before: RevisionEntry,
  after: RevisionEntry,
  serialOf: (exposureId: string) => string = (id) => id.slice(0, 8),
): Change[] | SurveyChange[] {
  if (before.kind === "thickness" && after.kind === "thickness") return diffSurveyRevisions(before, after);
  if (before.kind === "coupon" && after.kind === "coupon") return diffCouponRevisions(before, after, serialOf);
  return [];
}

function diffCouponRevisions(
  before: Extract<RevisionEntry, { kind: "coupon" }>,
  after: Extract<RevisionEntry, { kind: "coupon" }>,
  serialOf: (exposureId: string) => string,
): Change[] {
  const changes: Change[] = [];
  const prior = new Map(before.results.map((r) => [r.exposure_id, r]));
  for (const r of after.results) {
    const p = prior.get(r.exposure_id);
    const coupon = serialOf(r.exposure_id);
    if (!p) {
      changes.push({ coupon, field: "result", before: "—", after: "added" });
      continue;
    }
    for (const key of Object.keys(labFieldLabels)) {
      const a = show(p.inputs.lab?.[key]);
      const b = show(r.inputs.lab?.[key]);
      if (a !== b) changes.push({ coupon, field: labFieldLabels[key], before: a, after: b });
    }
    const rateText = (rate: { mmPerYear: number } | null) => (rate ? rate.mmPerYear.toFixed(4) : "not determinable");
    const ra = rateText(p.computed.rate);
    const rb = rateText(r.computed.rate);
    if (ra !== rb) changes.push({ coupon, field: "general rate, mm/y", before: ra, after: rb });
    if (p.computed.severity.worst !== r.computed.severity.worst)
      changes.push({
        coupon,
        field: "worst severity",
        before: p.computed.severity.worst ?? "not graded",
        after: r.computed.severity.worst ?? "not graded",
      });
    prior.delete(r.exposure_id);
  }
  for (const [id] of prior)
    changes.push({ coupon: serialOf(id), field: "result", before: "present", after: "removed" });
  // Files: compared only when both revisions recorded theirs.
  if (before.attachments && after.attachments) {
    const had = new Map(before.attachments.map((a) => [a.id, a]));
    const has = new Map(after.attachments.map((a) => [a.id, a]));
    for (const a of after.attachments)
      if (!had.has(a.id))
        changes.push({
          coupon: serialOf(a.exposureId),
          field: fileWords(a.kind),
          before: "—",
          after: `${a.name} added`,
        });
    for (const a of before.attachments)
      if (!has.has(a.id))
        changes.push({ coupon: serialOf(a.exposureId), field: fileWords(a.kind), before: a.name, after: "removed" });
  }
  return changes;
}

const readingFields: Array<[keyof ReadingSnapshot, string]> = [
  ["measured_on", "date measured"],
  ["thickness_mm", "thickness, mm"],
  ["quadrant_readings_mm", "quadrant readings, mm"],
  ["method", "method"],
  ["instrument", "instrument"],
  ["instrument_resolution_mm", "instrument resolution, mm"],
  ["technician", "technician"],
  ["notes", "notes"],
];

function diffSurveyRevisions(
  before: Extract<RevisionEntry, { kind: "thickness" }>,
  after: Extract<RevisionEntry, { kind: "thickness" }>,
): SurveyChange[] {
  const changes: SurveyChange[] = [];
  const prior = new Map(before.results.map((r) => [r.cml_id, r]));
  for (const r of after.results) {
    const p = prior.get(r.cml_id);
    const cml = r.cml_tag;
    if (!p) {
      changes.push({ cml, field: "reading", before: "—", after: `added: ${r.thickness_mm} mm on ${r.measured_on}` });
      continue;
    }
    for (const [key, label] of readingFields) {
      const a = show(p[key]);
      const b = show(r[key]);
      if (a !== b) changes.push({ cml, field: label, before: a, after: b });
    }
    const flagText = (flags: StoredFlag[]) =>
      flags.length
        ? flags.map((f) => `${f.code} (${f.severity === "warning" ? "warning" : "note"})`).join(", ")
        : "none";
    const fa = flagText(p.flags ?? []);
    const fb = flagText(r.flags ?? []);
    if (fa !== fb) changes.push({ cml, field: "flags", before: fa, after: fb });
    prior.delete(r.cml_id);
  }
  for (const p of prior.values())
    changes.push({
      cml: p.cml_tag,
      field: "reading",
      before: `${p.thickness_mm} mm on ${p.measured_on}`,
      after: "removed",
    });
  if (before.attachments && after.attachments) {
    const had = new Set(before.attachments.map((a) => a.id));
    const has = new Set(after.attachments.map((a) => a.id));
    for (const a of after.attachments)
      if (!had.has(a.id))
        changes.push({ cml: "survey", field: fileWords(a.kind), before: "—", after: `${a.name} added` });
    for (const a of before.attachments)
      if (!has.has(a.id)) changes.push({ cml: "survey", field: fileWords(a.kind), before: a.name, after: "removed" });
  }
  return changes;
}

/** Approved (not superseded) results at the points of this submission, for trend charts. */
export async function pointHistory(conn: Db, ownerId: string, exposureIds: string[]) {
  if (exposureIds.length === 0) return [];
  const { rows } = await conn.raw<{
    rows: Array<{
      point_tag: string;
      removed_at: Date;
      general_mm_y: number;
      pitting_mm_y: number | null;
      serial: string;
    }>;
  }>(
    `select p.tag as point_tag, e.removed_at,
            (r.computed->'rate'->>'mmPerYear')::float8 as general_mm_y,
            (r.computed->'pitting'->>'mmPerYear')::float8 as pitting_mm_y,
            cp.serial
       from coupon_results r
       join submissions s on s.id = r.submission_id and s.status = 'approved' and s.owner_id = ?
       join coupon_exposures e on e.id = r.exposure_id
       join coupons cp on cp.id = e.coupon_id
       join monitoring_points p on p.id = e.point_id
      where e.point_id in (select point_id from coupon_exposures where id = any(?::uuid[]))
        and r.computed->'rate'->>'mmPerYear' is not null
      order by p.tag, e.removed_at`,
    [ownerId, exposureIds],
  );
  return rows.map((r) => ({
    pointTag: r.point_tag,
    removedAt: new Date(r.removed_at).toISOString(),
    generalMmPerYear: r.general_mm_y,
    pittingMmPerYear: r.pitting_mm_y,
    serial: r.serial,
  }));
}
