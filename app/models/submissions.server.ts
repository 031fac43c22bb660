import { textProblem } from "../services/form-fields";
import type { Knex } from "knex";
import { isApiClient, type Reader, type SessionUser } from "../context";
import { assessCoupon, type CouponAssessment, type CouponResultInput } from "../domain/index.ts";
import type { Db } from "../services/db.server";
import { Conflict, Forbidden, Invalid, NotFoundInTenant, type FieldErrors } from "../services/outcome";
import { cleanFileName } from "../services/file-names";
import { materialName } from "../services/coupon-spec";
import { can } from "../services/permissions";
import { actorOf, recordAudit } from "./audit.server";
import { couponWorkSiteIds, coveredSiteIds } from "./contract-coverage.server";
import { approvedRatesAtPoints, type LabInputs } from "./lab-results.server";
import type { LabText } from "../services/lab-spec";
import { enqueueNotification } from "./notifications.server";
import { ownerSettings } from "./owner-settings.server";
import { surveyReadings, type SurveyReading } from "./survey-review.server";
import { submitSurvey } from "./thickness-surveys.server";

/**
 * Submissions: a contractor's lab results sent as one on its way to the owner — the list
 * and one submission as each role may see it, and submitting it for review.
 */

export type SubmissionSummary = {
  id: string;
  reference: string;
  kind: "coupon" | "thickness";
  status: string;
  revision: number;
  version: number;
  siteId: string;
  siteName: string;
  siteCode: string;
  timeZone: string;
  ownerId: string;
  ownerName: string;
  contractorId: string;
  contractorName: string;
  /** Coupon results, or for a thickness survey its readings. */
  resultCount: number;
  worstSeverity: string | null;
  flagCount: number;
  createdAt: string;
  submittedAt: string | null;
  decidedAt: string | null;
  decisionComment: string | null;
  /** Who decided (name, or e-mail when the name is empty); null while undecided. */
  decidedByName: string | null;
};

/**
 * The submissions a user may read: owner staff see their organisation's submissions once
 * submitted (drafts stay with the contractor); a contractor sees its own coupon submissions
 * at sites an active coupon-monitoring contract covers, and its own thickness surveys at
 * sites an active thickness-inspection contract covers.
 */
export function submissionsQuery(conn: Db, user: Reader): Knex.QueryBuilder {
  const q = conn("submissions as sub")
    .join("sites as s", "s.id", "sub.site_id")
    .join("organisations as o", "o.id", "sub.owner_id")
    .join("organisations as k", "k.id", "sub.contractor_id");
  if (isApiClient(user) || user.organisation.kind === "owner")
    q.where("sub.owner_id", user.organisation.id).whereNot("sub.status", "draft");
  else
    q.where("sub.contractor_id", user.organisation.id).where((w) =>
      w
        .where((c) => c.where("sub.kind", "coupon").whereIn("sub.site_id", couponWorkSiteIds(conn, user)))
        .orWhere((t) =>
          t
            .where("sub.kind", "thickness")
            .whereIn("sub.site_id", coveredSiteIds(conn, user.organisation.id, "thickness_inspection")),
        ),
    );
  return q;
}

const submissionColumns = (conn: Db) => [
  "sub.id",
  "sub.reference",
  "sub.kind",
  "sub.status",
  "sub.revision",
  "sub.version",
  "sub.site_id",
  "s.name as site_name",
  "s.code as site_code",
  "s.time_zone",
  "sub.owner_id",
  "o.name as owner_name",
  "sub.contractor_id",
  "k.name as contractor_name",
  // a survey's results are its readings
  conn.raw(
    `(case when sub.kind = 'thickness'
           then (select count(*)::int from thickness_readings t where t.submission_id = sub.id)
           else (select count(*)::int from coupon_results r where r.submission_id = sub.id) end) as result_count`,
  ),
  "sub.worst_severity",
  "sub.flag_count",
  "sub.created_at",
  "sub.submitted_at",
  "sub.decided_at",
  "sub.decision_comment",
  conn.raw(
    "(select coalesce(nullif(d.name, ''), d.email) from users d where d.id = sub.decided_by) as decided_by_name",
  ),
];

/** A submission row with its site, owner and contractor, as PostgreSQL returns it. */
export type SubmissionDbRow = {
  id: string;
  reference: string;
  kind: "coupon" | "thickness";
  status: string;
  revision: number;
  version: number;
  site_id: string;
  site_name: string;
  site_code: string;
  time_zone: string;
  owner_id: string;
  owner_name: string;
  contractor_id: string;
  contractor_name: string;
  result_count: number;
  worst_severity: string | null;
  flag_count: number;
  created_at: Date;
  submitted_at: Date | null;
  decided_at: Date | null;
  decision_comment: string | null;
  decided_by_name: string | null;
};

export function toSubmissionSummary(r: SubmissionDbRow): SubmissionSummary {
  const iso = (v: Date | null) => (v ? new Date(v).toISOString() : null);
  return {
    id: r.id,
    reference: r.reference,
    kind: r.kind,
    status: r.status,
    revision: r.revision,
    version: r.version,
    siteId: r.site_id,
    siteName: r.site_name,
    siteCode: r.site_code,
    timeZone: r.time_zone,
    ownerId: r.owner_id,
    ownerName: r.owner_name,
    contractorId: r.contractor_id,
    contractorName: r.contractor_name,
    resultCount: r.result_count,
    worstSeverity: r.worst_severity,
    flagCount: r.flag_count,
    createdAt: new Date(r.created_at).toISOString(),
    submittedAt: iso(r.submitted_at),
    decidedAt: iso(r.decided_at),
    decisionComment: r.decision_comment,
    decidedByName: r.decided_by_name,
  };
}

export type SubmissionFilters = {
  siteId?: string;
  status?: string;
  kind?: string;
  contractorId?: string;
  worstSeverity?: string;
  /** true: only submissions carrying quality flags; false: only clean ones. */
  flagged?: boolean;
  order?: "newest" | "oldest";
};

/** How many submissions the user may read are in this state (the home page's counts). */
export async function countSubmissions(conn: Db, user: SessionUser, status: string): Promise<number> {
  const row = await submissionsQuery(conn, user).where("sub.status", status).count<{ n: string }[]>({ n: "*" }).first();
  return Number(row?.n ?? 0);
}

function applyFilters(q: Knex.QueryBuilder, filters: SubmissionFilters): Knex.QueryBuilder {
  if (filters.siteId) q.where("sub.site_id", filters.siteId);
  if (filters.status) q.where("sub.status", filters.status);
  if (filters.kind) q.where("sub.kind", filters.kind);
  if (filters.contractorId) q.where("sub.contractor_id", filters.contractorId);
  if (filters.worstSeverity) q.where("sub.worst_severity", filters.worstSeverity);
  if (filters.flagged === true) q.where("sub.flag_count", ">", 0);
  if (filters.flagged === false) q.where("sub.flag_count", 0);
  return q;
}

/**
 * One numbered page of the submissions a user may read (newest first), with how many
 * there are in all: the submissions screen's "showing 51–100 of 312". A page past the
 * end is the last page.
 */
export async function submissionsPage(
  conn: Db,
  user: SessionUser,
  filters: SubmissionFilters,
  page: { number: number; size: number },
): Promise<{ items: SubmissionSummary[]; total: number; number: number; size: number }> {
  const counted = await applyFilters(submissionsQuery(conn, user), filters).count<{ n: string }[]>({ n: "*" }).first();
  const total = Number(counted?.n ?? 0);
  const last = Math.max(1, Math.ceil(total / page.size));
  const number = Math.min(Math.max(1, Math.floor(page.number) || 1), last);
  const rows: SubmissionDbRow[] = await applyFilters(
    submissionsQuery(conn, user).select(submissionColumns(conn)),
    filters,
  )
    .orderByRaw(`${submissionSortKey} desc, sub.id desc`)
    .limit(page.size)
    .offset((number - 1) * page.size);
  return { items: rows.map(toSubmissionSummary), total, number, size: page.size };
}

/** A position in the list: the sort time to the microsecond (as PostgreSQL wrote it) and the id. */
export type SubmissionCursor = { at: string; id: string };

/** The cursor's time: UTC, six fractional digits, years 0001–9999 — what PostgreSQL reads back exactly. */
const cursorTimePattern = /^(\d{4})-(\d{2})-(\d{2})T(\d{2}):(\d{2}):(\d{2})\.(\d{6})Z$/;
const cursorIdPattern = /^[0-9a-f]{8}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{12}$/i;

/**
 * Reads a cursor "<time>|<id>" as `listSubmissions` wrote it, or null when it is not one
 * (garbage, a time JavaScript would parse but PostgreSQL would not, a non-calendar date).
 */
export function parseSubmissionCursor(text: string): SubmissionCursor | null {
  const [at, id, ...rest] = text.split("|");
  if (rest.length || !at || !id || !cursorIdPattern.test(id)) return null;
  const m = cursorTimePattern.exec(at);
  if (!m) return null;
  const [year, month, day, hour, minute, second] = m.slice(1, 7).map(Number);
  const d = new Date(Date.UTC(year, month - 1, day, hour, minute, second));
  if (year < 1 || d.getUTCFullYear() !== year || d.getUTCMonth() !== month - 1 || d.getUTCDate() !== day) return null;
  if (hour > 23 || minute > 59 || second > 59) return null;
  return { at, id: id.toLowerCase() };
}

/** The sort time of a listed submission: sent, or started for drafts. */
const submissionSortKey = "coalesce(sub.submitted_at, sub.created_at)";
/** The same, as text to the microsecond (JavaScript dates keep milliseconds only). */
const submissionSortText = `to_char(${submissionSortKey} at time zone 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US"Z"')`;

/**
 * Keyset pagination over the time a submission was sent (or started, for drafts) and its
 * id: the cursor is "<time to the microsecond>|<id>", so rows sharing a time are neither
 * repeated nor skipped. Newest first by default; the review queue reads oldest first.
 */
export async function listSubmissions(
  conn: Db,
  user: Reader,
  filters: SubmissionFilters,
  page: { limit: number; cursor?: SubmissionCursor },
): Promise<{ items: SubmissionSummary[]; nextCursor: string | null }> {
  const sortKey = submissionSortKey;
  const q = submissionsQuery(conn, user).select([
    ...submissionColumns(conn),
    conn.raw(`${submissionSortText} as sort_at`),
  ]);
  applyFilters(q, filters);
  const oldest = filters.order === "oldest";
  if (page.cursor) {
    q.whereRaw(`(${sortKey}, sub.id) ${oldest ? ">" : "<"} (?::timestamptz, ?::uuid)`, [
      page.cursor.at,
      page.cursor.id,
    ]);
  }
  const dir = oldest ? "asc" : "desc";
  const rows: Array<SubmissionDbRow & { sort_at: string }> = await q
    .orderByRaw(`${sortKey} ${dir}, sub.id ${dir}`)
    .limit(page.limit + 1);
  const items = rows.slice(0, page.limit).map(toSubmissionSummary);
  const lastRow = rows.length > page.limit ? rows[page.limit - 1] : undefined;
  return { items, nextCursor: lastRow ? `${lastRow.sort_at}|${lastRow.id}` : null };
}

export type SubmissionResult = {
  id: string;
  exposureId: string;
  couponSerial: string;
  pointTag: string;
  circuitTag: string;
  installedAt: string;
  removedAt: string;
  cleaningMethod: string;
  labNotes: string;
  /** What the technician recorded at removal. */
  removal: { deposits: string; damage: string; notes: string };
  /** The coupon's material by name and the point's mounting and orientation. */
  materialName: string;
  mounting: string;
  orientation: string;
  inputs: { calculation: CouponResultInput; lab: LabInputs; text?: LabText };
  computed: CouponAssessment;
  generalSeverity: string | null;
  pittingSeverity: string | null;
};

/** One submission with what it holds: coupon results, or a thickness survey's readings. */
export type SubmissionDetail =
  | { kind: "coupon"; submission: SubmissionSummary; results: SubmissionResult[] }
  | { kind: "thickness"; submission: SubmissionSummary; readings: SurveyReading[] };

export async function getSubmission(conn: Db, user: Reader, id: string): Promise<SubmissionDetail> {
  const row: SubmissionDbRow | undefined = await submissionsQuery(conn, user)
    .where("sub.id", id)
    .first(submissionColumns(conn));
  if (!row) throw new NotFoundInTenant("submission");
  if (row.kind === "thickness")
    return { kind: "thickness", submission: toSubmissionSummary(row), readings: await surveyReadings(conn, id) };
  const results: Array<{
    id: string;
    exposure_id: string;
    serial: string;
    point_tag: string;
    circuit_tag: string;
    installed_at: Date;
    removed_at: Date;
    cleaning_method: string;
    lab_notes: string;
    deposits: string;
    damage: string;
    removal_notes: string;
    material_code: string;
    mounting: string;
    orientation: string;
    inputs: SubmissionResult["inputs"];
    computed: CouponAssessment;
    general_severity: string | null;
    pitting_severity: string | null;
  }> = await conn("coupon_results as r")
    .join("coupon_exposures as e", "e.id", "r.exposure_id")
    .join("coupons as c", "c.id", "e.coupon_id")
    .join("monitoring_points as p", "p.id", "e.point_id")
    .join("circuits as ci", "ci.id", "p.circuit_id")
    .where("r.submission_id", id)
    .orderBy("p.tag")
    .select(
      "r.id",
      "r.exposure_id",
      "c.serial",
      "p.tag as point_tag",
      "ci.tag as circuit_tag",
      "e.installed_at",
      "e.removed_at",
      "r.cleaning_method",
      "r.lab_notes",
      "e.deposits",
      "e.damage",
      "e.notes as removal_notes",
      "c.material_code",
      "p.mounting",
      "p.orientation",
      "r.inputs",
      "r.computed",
      "r.general_severity",
      "r.pitting_severity",
    );
  return {
    kind: "coupon",
    submission: toSubmissionSummary(row),
    results: results.map((r) => ({
      id: r.id,
      exposureId: r.exposure_id,
      couponSerial: r.serial,
      pointTag: r.point_tag,
      circuitTag: r.circuit_tag,
      installedAt: new Date(r.installed_at).toISOString(),
      removedAt: new Date(r.removed_at).toISOString(),
      cleaningMethod: r.cleaning_method,
      labNotes: r.lab_notes,
      removal: { deposits: r.deposits, damage: r.damage, notes: r.removal_notes },
      materialName: materialName(r.material_code),
      mounting: r.mounting,
      orientation: r.orientation,
      inputs: r.inputs,
      computed: r.computed,
      generalSeverity: r.general_severity,
      pittingSeverity: r.pitting_severity,
    })),
  };
}

const severityRank = { low: 0, moderate: 1, high: 2, severe: 3 } as const;

/**
 * Submits a draft (or returned) submission: every result is recomputed from its stored
 * inputs with the owner's current thresholds; a submission with errors is refused whole.
 * Quality flags travel with it. A thickness survey's readings are judged by `submitSurvey`.
 */
export async function submitForReview(
  conn: Knex,
  user: SessionUser,
  submissionId: string,
  requestId?: string,
  /** The technician's answer to the engineer's return comment, kept with the new revision. */
  reply = "",
): Promise<{ reference: string }> {
  if (!can(user, "recordWork")) throw new Forbidden("Only the contractor's technicians submit results for review.");
  const answer = reply.trim();
  if (answer.length > 4000) throw new Invalid({ reply: "Keep the reply under 4000 characters." });
  if (!cursorIdPattern.test(submissionId)) throw new NotFoundInTenant("submission");
  const replyProblem = textProblem(answer, "the reply", true);
  if (replyProblem) throw new Invalid({ reply: replyProblem });
  return conn.transaction(async (trx) => {
    // Lock first, then read: a second submit waits here and then sees the status the first one wrote.
    await trx("submissions").where({ id: submissionId, contractor_id: user.organisation.id }).forUpdate().first("id");
    const detail = await getSubmission(trx, user, submissionId);
    const { submission } = detail;
    const results = detail.kind === "coupon" ? detail.results : [];
    if (submission.status !== "draft" && submission.status !== "returned") {
      throw new Conflict(
        `Submission ${submission.reference} is ${submission.status}; only a draft or returned submission can be submitted.`,
      );
    }
    if (submission.kind === "thickness") return submitSurvey(trx, user, submission, answer, requestId);
    if (results.length === 0) throw new Invalid({ form: "The submission has no results yet." });
    const settings = await ownerSettings(trx, submission.ownerId);
    const errors: FieldErrors = {};
    // Null when nothing could be graded (every result not determinable or without thresholds).
    let worst: keyof typeof severityRank | null = null;
    let flagCount = 0;
    // One read of every point's approved history, one write of every result (not a query per coupon).
    const history = await approvedRatesAtPoints(
      trx,
      results.map((r) => r.exposureId),
    );
    const recomputed: Array<Record<string, unknown>> = [];
    for (const r of results) {
      const input = {
        ...r.inputs.calculation,
        generalThresholds: settings.generalThresholds,
        pittingThresholds: settings.pittingThresholds,
        familyThresholds: settings.familyThresholds,
        minimumExposureDays: settings.minimumExposureDays,
        historyMmPerYear: history.get(r.exposureId)?.general ?? [],
        pittingHistoryMmPerYear: history.get(r.exposureId)?.pitting ?? [],
      };
      const outcome = assessCoupon(input);
      if (!outcome.ok) {
        errors[r.couponSerial] = Object.values(outcome.errors).join(" ");
        continue;
      }
      const res = outcome.result;
      // No rate enters the history from a coupon that cannot be rated; the lab must say what it did.
      if (!res.determinable && !r.inputs.lab.labNotes.trim()) {
        errors[r.couponSerial] =
          `No rate can be determined for coupon ${r.couponSerial} (${res.notDeterminableReason ?? "see its flags"}). ` +
          "Add a lab note on its lab-results page saying what was checked (re-cleaning, the blank, the weighing) before submitting.";
        continue;
      }
      if (res.severity.worst && (worst === null || severityRank[res.severity.worst] > severityRank[worst]))
        worst = res.severity.worst;
      flagCount += res.flags.length;
      recomputed.push({
        id: r.id,
        inputs: { calculation: input, lab: r.inputs.lab, text: r.inputs.text },
        computed: res,
        flags: res.flags,
        general_severity: res.severity.general,
        pitting_severity: res.severity.pitting,
      });
    }
    if (Object.keys(errors).length) throw new Invalid(errors);
    await trx.raw(
      `update coupon_results r
          set inputs = v.inputs, computed = v.computed, flags = v.flags,
              general_severity = v.general_severity, pitting_severity = v.pitting_severity, updated_at = now()
         from jsonb_to_recordset(?::jsonb)
              as v(id uuid, inputs jsonb, computed jsonb, flags jsonb, general_severity text, pitting_severity text)
        where r.id = v.id and r.submission_id = ?`,
      [JSON.stringify(recomputed), submissionId],
    );
    // A returned submission (or an opened correction) comes back as the next revision.
    const snapshot = await trx("coupon_results")
      .where({ submission_id: submissionId })
      .select("exposure_id", "inputs", "computed");
    const files = await trx("attachments")
      .whereIn(
        "exposure_id",
        results.map((r) => r.exposureId),
      )
      .where("state", "stored")
      .orderBy("created_at")
      .select("id", "exposure_id", "kind", "original_name", "sha256");
    await recordSubmittedRevision(trx, user, submission, {
      reply: answer,
      worstSeverity: worst,
      flagCount,
      snapshot,
      files: files.map((f) => ({
        id: f.id,
        exposureId: f.exposure_id,
        kind: f.kind,
        name: cleanFileName(f.original_name),
        sha256: f.sha256,
      })),
      audit: { results: results.length, worst_severity: worst, flags: flagCount },
      requestId,
    });
    return { reference: submission.reference };
  });
}

/**
 * The end of every submit, of either kind: the submission becomes "submitted" (a returned one
 * as its next revision), the revision's content and files are kept for the diff, the audit
 * event is written and the owner's engineers are told.
 */
export async function recordSubmittedRevision(
  trx: Knex.Transaction,
  user: SessionUser,
  submission: Pick<SubmissionSummary, "id" | "status" | "revision" | "ownerId">,
  sent: {
    reply: string;
    worstSeverity: string | null;
    flagCount: number;
    snapshot: unknown;
    files: Array<Record<string, unknown>>;
    /** What the audit event says beside the status and revision. */
    audit: Record<string, unknown>;
    requestId?: string | null;
  },
): Promise<{ revision: number }> {
  const revision =
    submission.status === "returned" &&
    (await trx("submission_revisions")
      .where({ submission_id: submission.id, revision: submission.revision })
      .first("revision"))
      ? submission.revision + 1
      : submission.revision;
  const [updated] = await trx("submissions")
    .where({ id: submission.id })
    .update({
      status: "submitted",
      revision,
      submitted_at: trx.fn.now(),
      submitted_by: user.id,
      // The previous return stays with its revision; the new revision waits for its own decision.
      decided_at: null,
      decided_by: null,
      decision_comment: null,
      worst_severity: sent.worstSeverity,
      flag_count: sent.flagCount,
      version: trx.raw("version + 1"),
      updated_at: trx.fn.now(),
    })
    .returning(["submitted_at"]);
  await trx("submission_revisions").insert({
    submission_id: submission.id,
    revision,
    submitted_at: updated.submitted_at,
    submitted_by: user.id,
    results: JSON.stringify(sent.snapshot),
    reply: submission.status === "returned" && sent.reply ? sent.reply : null,
    attachments: JSON.stringify(sent.files),
  });
  await recordAudit(trx, {
    ownerId: submission.ownerId,
    actor: actorOf(user),
    action: "submission.submitted",
    recordType: "submission",
    recordId: submission.id,
    before: { status: submission.status },
    after: { status: "submitted", revision, ...sent.audit },
    requestId: sent.requestId ?? undefined,
  });
  await enqueueNotification(trx, { kind: "submission.submitted", submissionId: submission.id, actorUserId: user.id });
  return { revision };
}

/**
 * Reads of submissions that screens need beside the submission itself, each
 * scoped to the owner whose record it is.
 */

export type SubmissionStatus = "draft" | "submitted" | "returned" | "approved" | "superseded";

type SubmissionRow = {
  id: string;
  owner_id: string;
  reference: string;
  revision: number;
  status: SubmissionStatus;
  supersedes_id: string | null;
  correction_reason: string | null;
  created_at: Date;
};

export type CorrectionRow = Pick<SubmissionRow, "id" | "status" | "revision" | "correction_reason" | "created_at">;

/** The corrections opened on this owner's submission, oldest first. */
export async function correctionsOf(conn: Db, ownerId: string, submissionId: string): Promise<CorrectionRow[]> {
  return conn<SubmissionRow>("submissions")
    .where({ supersedes_id: submissionId, owner_id: ownerId })
    .orderBy("created_at")
    .select("id", "status", "revision", "correction_reason", "created_at");
}

export type CorrectedSubmission = Pick<SubmissionRow, "id" | "reference" | "revision" | "status" | "correction_reason">;

/**
 * When this owner's submission is a correction: the submission it corrects, with the reason
 * given for the correction (the correction's own). Undefined for an original.
 */
export async function correctedSubmissionOf(
  conn: Db,
  ownerId: string,
  submissionId: string,
): Promise<CorrectedSubmission | undefined> {
  return conn("submissions as s")
    .join("submissions as o", "o.id", "s.supersedes_id")
    .where({ "s.id": submissionId, "s.owner_id": ownerId })
    .first<CorrectedSubmission | undefined>("o.id", "o.reference", "o.revision", "o.status", "s.correction_reason");
}
