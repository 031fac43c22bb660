import { createHash } from "node:crypto";
import type { Knex } from "knex";
import { createElement } from "react";
import { CorrectionOpenedEmail, correctionOpenedSubject } from "../emails/correction-opened";
import {
  SubmissionApprovedEmail,
  submissionApprovedSubject,
  SubmissionReturnedEmail,
  submissionReturnedSubject,
  decidedBy,
} from "../emails/submission-decided";
import { SubmissionSubmittedEmail, submissionSubmittedSubject } from "../emails/submission-submitted";
import { MemberInvitedEmail, memberInvitedSubject } from "../emails/member-invited";
import { OverdueReminderEmail, overdueReminderSubject } from "../emails/overdue-reminder";
import { renderEmail } from "../emails/render.server";
import { BelowRequiredEmail, belowRequiredSubject } from "../emails/below-required";
import { CAUTION, SeriousResultEmail, seriousResultSubject, type SeriousBand } from "../emails/serious-result";
import { severityBand, type RateKind, type Severity, type SeverityThresholds } from "../domain/index.ts";
import type { Role } from "../context";
import type { Db } from "../services/db.server";
import { env } from "../services/env.server";
import { can, roleLabels } from "../services/permissions";
import { localDayInHours } from "../services/time";
import { contractInForceOnSql } from "./contract-coverage.server";

/**
 * E-mail notifications, written to the outbox (email_outbox) inside the caller's
 * transaction, so a message exists exactly when the change that causes it commits.
 * Delivery is the job queue's business (app/jobs/queue.server.ts); when the queue
 * runs in this process it is told about new messages right after the commit.
 *
 * Who hears about what:
 * - a person invited by an owner's administrator → that person, with the sign-in link;
 * - a submission sent for review → every active integrity engineer of the owner;
 * - a submission returned or approved → the technician who submitted it;
 * - a submission approved with a high or severe result → also the owner's integrity
 *   engineers and plant managers, with what the grade means and the engineering caution;
 * - every morning at 06:00 site time → each contractor's technicians, the pulls overdue at
 *   each site its live coupon-monitoring contracts cover (one message per site).
 * Nobody hears about their own action: the person who caused an event (its `actorUserId`)
 * is taken off every list of recipients, whatever the list.
 * Each message is one recipient's, keyed by event and address, so repeating an event
 * (a retried job, a second run of the reminder) adds nothing. The words and the HTML and
 * text parts come from the components in app/emails.
 */

export type NotificationEvent =
  | { kind: "member.invited"; userId: string; actorUserId: string | null }
  | { kind: "submission.submitted"; submissionId: string; actorUserId: string | null }
  | { kind: "submission.returned"; submissionId: string; actorUserId: string | null }
  | { kind: "submission.approved"; submissionId: string; actorUserId: string | null }
  /** An approved submission reopened as a correction (`submissionId` is the correction's). */
  | { kind: "submission.correction_opened"; submissionId: string; actorUserId: string | null }
  /**
   * One contractor's reminder for one site: `day` is the site's date (YYYY-MM-DD), `asOf`
   * the instant the pulls are judged overdue at. Sent by the job, so nobody acted.
   */
  | { kind: "overdue.reminder"; contractorId: string; siteId: string; day: string; asOf: Date }
  /**
   * CMLs that a computation put at or below their required thickness (`circuitLifeIds`:
   * the new current versions). To every integrity engineer of the owner, the approving
   * one included: the message is about the line, not about anyone's action.
   */
  | {
      kind: "life.below_required";
      ownerId: string;
      causeSubmissionId: string | null;
      cmls: Array<{ circuitLifeId: string; cmlId: string }>;
    };

type OutboxMessage = {
  /** The user the message is for (dropped when they caused the event). */
  recipientId: string;
  ownerId: string | null;
  eventKey: string;
  to: string;
  subject: string;
  html: string;
  text: string;
};

type Recipient = { id: string; email: string; name: string; units: "si" | "us"; role: string };
const recipientColumns = ["id", "email", "name", "units", "role"] as const;

// --------------------------------------------------------------------------- after commit

let committedListener: ((outboxIds: string[]) => unknown) | undefined;

/**
 * The job queue registers here when it starts in this process, to queue new messages as
 * soon as their transaction commits (the minute sweep catches anything this misses).
 */
export function onOutboxCommitted(listener: ((outboxIds: string[]) => unknown) | undefined): void {
  committedListener = listener;
}

function announceAfterCommit(conn: Db, ids: string[]) {
  const listener = committedListener;
  if (!listener || ids.length === 0) return;
  const run = () => {
    try {
      void Promise.resolve(listener(ids)).catch(() => undefined);
    } catch {
      // the sweep delivers it
    }
  };
  if (!conn.isTransaction) return run();
  // The outermost transaction: a savepoint's release is not yet a commit.
  let trx = conn as Knex.Transaction;
  while (trx.parentTransaction) trx = trx.parentTransaction;
  trx.executionPromise.then(run, () => undefined);
}

// --------------------------------------------------------------------------- writing

async function writeOutbox(conn: Db, messages: OutboxMessage[]): Promise<string[]> {
  if (messages.length === 0) return [];
  const rows = await conn("email_outbox")
    .insert(
      messages.map((m) => ({
        owner_id: m.ownerId,
        event_key: m.eventKey,
        to_email: m.to,
        subject: m.subject,
        html: m.html,
        text: m.text,
      })),
    )
    .onConflict("event_key")
    .ignore()
    .returning("id");
  return rows.map((r: { id: string }) => r.id);
}

/**
 * Writes the messages an event causes into the outbox, inside `trx` (the transaction of
 * the change itself). Returns the ids of the messages added; an event already notified
 * adds none.
 */
export async function enqueueNotification(trx: Db, event: NotificationEvent): Promise<string[]> {
  const messages =
    event.kind === "overdue.reminder"
      ? await reminderMessages(trx, event)
      : event.kind === "member.invited"
        ? await invitationMessages(trx, event.userId)
        : event.kind === "life.below_required"
          ? await belowRequiredMessages(trx, event)
          : await submissionMessages(trx, event);
  // Nobody hears about their own action, whichever list they are on.
  const actor = "actorUserId" in event ? event.actorUserId : null;
  const ids = await writeOutbox(
    trx,
    messages.filter((m) => actor === null || m.recipientId !== actor),
  );
  announceAfterCommit(trx, ids);
  return ids;
}

// --------------------------------------------------------------------------- submissions

type SubmissionFacts = {
  id: string;
  kind: "coupon" | "thickness";
  /** A thickness survey's circuits, by tag (empty for coupon results). */
  circuitTags: string[];
  reference: string;
  revision: number;
  status: string;
  worstSeverity: string | null;
  flagCount: number;
  resultCount: number;
  decisionComment: string | null;
  ownerId: string;
  ownerName: string;
  contractorName: string;
  siteName: string;
  siteCode: string;
  submittedBy: string | null;
  decidedByName: string | null;
};

async function submissionFacts(conn: Db, submissionId: string): Promise<SubmissionFacts> {
  const r = await conn("submissions as sub")
    .join("organisations as o", "o.id", "sub.owner_id")
    .join("organisations as k", "k.id", "sub.contractor_id")
    .join("sites as s", "s.id", "sub.site_id")
    .leftJoin("users as d", "d.id", "sub.decided_by")
    .where("sub.id", submissionId)
    .first(
      "sub.id",
      "sub.reference",
      "sub.kind",
      "sub.revision",
      "sub.status",
      "sub.worst_severity",
      "sub.flag_count",
      "sub.decision_comment",
      "sub.owner_id",
      "sub.submitted_by",
      "o.name as owner_name",
      "k.name as contractor_name",
      "s.name as site_name",
      "s.code as site_code",
      "d.name as decided_by_name",
      conn.raw(
        "(case when sub.kind = 'thickness' then (select count(*)::int from thickness_readings t where t.submission_id = sub.id) else (select count(*)::int from coupon_results r where r.submission_id = sub.id) end) as result_count",
      ),
      conn.raw(
        "array(select c.tag from survey_circuits sc join circuits c on c.id = sc.circuit_id where sc.submission_id = sub.id order by c.tag) as circuit_tags",
      ),
    );
  if (!r) throw new Error(`no submission ${submissionId} to notify about`);
  return {
    id: r.id,
    kind: r.kind,
    circuitTags: r.circuit_tags ?? [],
    reference: r.reference,
    revision: r.revision,
    status: r.status,
    worstSeverity: r.worst_severity,
    flagCount: r.flag_count,
    resultCount: r.result_count,
    decisionComment: r.decision_comment,
    ownerId: r.owner_id,
    ownerName: r.owner_name,
    contractorName: r.contractor_name,
    siteName: r.site_name,
    siteCode: r.site_code,
    submittedBy: r.submitted_by,
    decidedByName: r.decided_by_name,
  };
}

async function ownerStaff(conn: Db, ownerId: string, roles: string[]): Promise<Recipient[]> {
  return conn("users")
    .where({ organisation_id: ownerId, status: "active" })
    .whereIn("role", roles)
    .orderBy("email")
    .select(...recipientColumns);
}

async function activeUser(conn: Db, userId: string | null): Promise<Recipient[]> {
  if (!userId) return [];
  return conn("users")
    .where({ id: userId, status: "active" })
    .select(...recipientColumns);
}

type SeriousResult = {
  circuitTag: string;
  circuitName: string;
  pointTag: string;
  pointName: string;
  couponSerial: string;
  generalMmY: number;
  pittingMmY: number | null;
  general: string | null;
  pitting: string | null;
  worst: string;
  /** What each kind was graded against, as stored with the result. */
  graded: Record<RateKind, { thresholds: unknown; basis: string | null }>;
};

/** The high and severe results of a submission, with where they are and how they were graded. */
async function seriousResults(conn: Db, submissionId: string): Promise<SeriousResult[]> {
  const { rows } = await conn.raw<{
    rows: Array<{
      circuit_tag: string;
      circuit_description: string;
      point_tag: string;
      access_fitting: string;
      orientation: string;
      serial: string;
      general_mm_y: number;
      pitting_mm_y: number | null;
      general_severity: string | null;
      pitting_severity: string | null;
      worst: string;
      general_thresholds: unknown;
      pitting_thresholds: unknown;
      general_basis: string | null;
      pitting_basis: string | null;
    }>;
  }>(
    `select ci.tag as circuit_tag, ci.description as circuit_description,
            p.tag as point_tag, p.access_fitting, p.orientation, cp.serial,
            (r.computed->'rate'->>'mmPerYear')::float8 as general_mm_y,
            (r.computed->'pitting'->>'mmPerYear')::float8 as pitting_mm_y,
            r.computed->'severity'->>'general' as general_severity,
            r.computed->'severity'->>'pitting' as pitting_severity,
            r.computed->'severity'->>'worst' as worst,
            r.computed->'basis'->'thresholds'->'general' as general_thresholds,
            r.computed->'basis'->'thresholds'->'pitting' as pitting_thresholds,
            r.computed->'severity'->>'generalBasis' as general_basis,
            r.computed->'severity'->>'pittingBasis' as pitting_basis
       from coupon_results r
       join coupon_exposures e on e.id = r.exposure_id
       join coupons cp on cp.id = e.coupon_id
       join monitoring_points p on p.id = e.point_id
       join circuits ci on ci.id = p.circuit_id
      where r.submission_id = ? and r.computed->'severity'->>'worst' in ('high', 'severe')
      order by ci.tag, p.tag, cp.serial`,
    [submissionId],
  );
  return rows.map((r) => ({
    circuitTag: r.circuit_tag,
    circuitName: r.circuit_description,
    pointTag: r.point_tag,
    pointName: [r.access_fitting, r.orientation]
      .map((x) => x.trim())
      .filter(Boolean)
      .join(", "),
    couponSerial: r.serial,
    generalMmY: r.general_mm_y,
    pittingMmY: r.pitting_mm_y,
    general: r.general_severity,
    pitting: r.pitting_severity,
    worst: r.worst,
    graded: {
      general: { thresholds: r.general_thresholds, basis: r.general_basis },
      pitting: { thresholds: r.pitting_thresholds, basis: r.pitting_basis },
    },
  }));
}

const isThresholds = (t: unknown): t is SeverityThresholds =>
  typeof t === "object" &&
  t !== null &&
  ["moderate", "high", "severe"].every((k) => typeof (t as Record<string, unknown>)[k] === "number");

/**
 * What the worst grade means for the results that reached it: the band of each rate kind
 * at that grade, from the thresholds stored with the result (the owner's, or the NACE
 * SP0775 bands of the calculation library). A result whose stored basis says neither
 * adds nothing.
 */
function worstBands(results: SeriousResult[], worst: string): SeriousBand[] {
  const bands: SeriousBand[] = [];
  for (const r of results) {
    for (const kind of ["general", "pitting"] as const) {
      if ((kind === "general" ? r.general : r.pitting) !== worst) continue;
      const { thresholds, basis } = r.graded[kind];
      const label = (basis ?? "").trim();
      if (isThresholds(thresholds)) {
        bands.push({ ...severityBand(kind, worst as Severity, thresholds), basis: label || "owner thresholds" });
      } else if (label.startsWith("NACE SP0775")) {
        bands.push({ ...severityBand(kind, worst as Severity), basis: label });
      }
    }
  }
  return bands;
}

async function submissionMessages(
  conn: Db,
  event: Exclude<NotificationEvent, { kind: "overdue.reminder" | "member.invited" | "life.below_required" }>,
): Promise<OutboxMessage[]> {
  const p = await submissionFacts(conn, event.submissionId);
  const origin = env().APP_ORIGIN;
  const key = (kind: string, r: Recipient) => `${kind}:${p.id}:rev${p.revision}:${r.email.toLowerCase()}`;
  const reviewUrl = `${origin}/review/${p.id}`;
  const submissionUrl = `${origin}/submissions/${p.id}`;
  const out: OutboxMessage[] = [];

  if (event.kind === "submission.submitted") {
    for (const r of await ownerStaff(conn, p.ownerId, ["integrity_engineer"])) {
      const props = {
        recipientName: r.name,
        reference: p.reference,
        revision: p.revision,
        contractorName: p.contractorName,
        ownerName: p.ownerName,
        siteName: p.siteName,
        resultCount: p.resultCount,
        worstSeverity: p.worstSeverity,
        flagCount: p.flagCount,
        reviewUrl,
        kind: p.kind,
        circuitTags: p.circuitTags,
      };
      out.push({
        recipientId: r.id,
        ownerId: p.ownerId,
        eventKey: key(event.kind, r),
        to: r.email,
        ...(await renderEmail(submissionSubmittedSubject(props), createElement(SubmissionSubmittedEmail, props))),
      });
    }
    return out;
  }

  if (event.kind === "submission.correction_opened") {
    // The correction has no submitter yet: tell whoever sent the submission it corrects.
    const original = await conn("submissions as c")
      .join("submissions as o", "o.id", "c.supersedes_id")
      .where("c.id", p.id)
      .first("o.submitted_by", "c.correction_reason");
    for (const r of await activeUser(conn, original?.submitted_by ?? null)) {
      const props = {
        recipientName: r.name,
        reference: p.reference,
        revision: p.revision,
        ownerName: p.ownerName,
        contractorName: p.contractorName,
        siteName: p.siteName,
        reason: original?.correction_reason || null,
        submissionUrl,
        kind: p.kind,
        circuitTags: p.circuitTags,
        resultCount: p.resultCount,
      };
      out.push({
        recipientId: r.id,
        ownerId: p.ownerId,
        eventKey: key(event.kind, r),
        to: r.email,
        ...(await renderEmail(correctionOpenedSubject(props), createElement(CorrectionOpenedEmail, props))),
      });
    }
    return out;
  }

  const approved = event.kind === "submission.approved";
  const comment = p.decisionComment?.trim() || null;
  for (const r of await activeUser(conn, p.submittedBy)) {
    const props = {
      recipientName: r.name,
      reference: p.reference,
      revision: p.revision,
      ownerName: p.ownerName,
      contractorName: p.contractorName,
      siteName: p.siteName,
      decidedByName: p.decidedByName,
      comment,
      submissionUrl,
      kind: p.kind,
      circuitTags: p.circuitTags,
      resultCount: p.resultCount,
    };
    out.push({
      recipientId: r.id,
      ownerId: p.ownerId,
      eventKey: key(event.kind, r),
      to: r.email,
      ...(await (approved
        ? renderEmail(submissionApprovedSubject(props), createElement(SubmissionApprovedEmail, props))
        : renderEmail(submissionReturnedSubject(props), createElement(SubmissionReturnedEmail, props)))),
    });
  }

  if (approved && (p.worstSeverity === "high" || p.worstSeverity === "severe")) {
    const results = await seriousResults(conn, p.id);
    const bands = worstBands(results, p.worstSeverity);
    for (const r of await ownerStaff(conn, p.ownerId, ["integrity_engineer", "plant_manager"])) {
      const props = {
        recipientName: r.name,
        recipientRole: r.role,
        units: r.units,
        reference: p.reference,
        ownerName: p.ownerName,
        contractorName: p.contractorName,
        siteName: p.siteName,
        siteCode: p.siteCode,
        decidedBy: decidedBy(p),
        worstSeverity: p.worstSeverity,
        results,
        bands,
        reviewUrl,
      };
      out.push({
        recipientId: r.id,
        ownerId: p.ownerId,
        eventKey: key("submission.approved-serious", r),
        to: r.email,
        ...(await renderEmail(seriousResultSubject(props), createElement(SeriousResultEmail, props))),
      });
    }
  }
  return out;
}

// --------------------------------------------------------------------------- below required thickness

async function belowRequiredMessages(
  conn: Db,
  event: Extract<NotificationEvent, { kind: "life.below_required" }>,
): Promise<OutboxMessage[]> {
  if (event.cmls.length === 0) return [];
  const { rows } = await conn.raw<{
    rows: Array<{
      site_name: string;
      site_id: string;
      circuit_tag: string;
      cml_tag: string;
      cml_id: string;
      last_thickness_mm: string;
      last_measured_on: string;
      required_mm: string;
    }>;
  }>(
    `select s.name as site_name, s.id as site_id, c.tag as circuit_tag, m.tag as cml_tag, m.id as cml_id,
            l.last_thickness_mm, to_char(l.last_measured_on, 'YYYY-MM-DD') as last_measured_on, cl.required_thickness_mm as required_mm
       from jsonb_to_recordset(?::jsonb) as x("circuitLifeId" uuid, "cmlId" uuid)
       join cml_life l on l.circuit_life_id = x."circuitLifeId" and l.cml_id = x."cmlId"
       join circuit_life cl on cl.id = l.circuit_life_id and cl.owner_id = ?
       join cmls m on m.id = l.cml_id
       join circuits c on c.id = cl.circuit_id
       join sites s on s.id = c.site_id
      order by s.name, c.tag, m.tag`,
    [JSON.stringify(event.cmls), event.ownerId],
  );
  if (rows.length === 0) return [];
  const owner: { name: string } | undefined = await conn("organisations").where({ id: event.ownerId }).first("name");
  const reference: { reference: string } | undefined = event.causeSubmissionId
    ? await conn("submissions").where({ id: event.causeSubmissionId }).first("reference")
    : undefined;
  const origin = env().APP_ORIGIN;
  const staff = (
    await ownerStaff(conn, event.ownerId, ["administrator", "integrity_engineer", "plant_manager"])
  ).filter((r) => can({ role: r.role as Role }, "decideSubmissions"));
  // One message per recipient and set of CMLs: the same finding computed twice adds nothing.
  const which = createHash("sha256")
    .update(rows.map((r) => r.cml_id).join(","))
    .digest("hex")
    .slice(0, 16);
  const out: OutboxMessage[] = [];
  for (const r of staff) {
    const props = {
      recipientName: r.name,
      units: r.units,
      ownerName: owner?.name ?? "",
      cause: reference ? `Survey ${reference.reference} was approved` : "The remaining life was recomputed",
      rows: rows.map((x) => ({
        siteName: x.site_name,
        circuitTag: x.circuit_tag,
        cmlTag: x.cml_tag,
        lastThicknessMm: Number(x.last_thickness_mm),
        lastMeasuredOn: x.last_measured_on,
        requiredMm: Number(x.required_mm),
      })),
      circuitsUrl: `${origin}/setup/sites/${rows[0].site_id}`,
    };
    out.push({
      recipientId: r.id,
      ownerId: event.ownerId,
      eventKey: `life.below_required:${event.causeSubmissionId ?? "recompute"}:${which}:${r.email.toLowerCase()}`,
      to: r.email,
      ...(await renderEmail(belowRequiredSubject(props), createElement(BelowRequiredEmail, props))),
    });
  }
  return out;
}

/** The engineering caution the serious-result message carries (its words live with the message). */
export { CAUTION };

// --------------------------------------------------------------------------- invitation

/**
 * The invitation: who invited the person, to which organisation (for a technician, the
 * contractor and the owner that engaged it), as what, and the link that starts the
 * sign-in with their address filled in.
 */
async function invitationMessages(conn: Db, userId: string): Promise<OutboxMessage[]> {
  const r = await conn("users as u")
    .join("organisations as o", "o.id", "u.organisation_id")
    .join("users as a", "a.id", "u.invited_by_user_id")
    .join("organisations as ao", "ao.id", "a.organisation_id")
    .where("u.id", userId)
    .whereNot("u.status", "disabled")
    .first<
      | {
          id: string;
          email: string;
          name: string;
          role: keyof typeof roleLabels;
          organisation_id: string;
          organisation_name: string;
          organisation_kind: "owner" | "contractor";
          invited_by_name: string;
          owner_id: string;
          owner_name: string;
        }
      | undefined
    >(
      "u.id",
      "u.email",
      "u.name",
      "u.role",
      "u.organisation_id",
      "o.name as organisation_name",
      "o.kind as organisation_kind",
      "a.name as invited_by_name",
      "ao.id as owner_id",
      "ao.name as owner_name",
    );
  if (!r) return [];
  const login = new URL("/auth/login", env().APP_ORIGIN);
  login.searchParams.set("login_hint", r.email);
  const props = {
    recipientName: r.name,
    email: r.email,
    invitedByName: r.invited_by_name,
    ownerName: r.owner_name,
    roleLabel: roleLabels[r.role],
    contractorName: r.organisation_kind === "contractor" ? r.organisation_name : null,
    signInUrl: login.toString(),
  };
  return [
    {
      recipientId: r.id,
      ownerId: r.owner_id,
      eventKey: `member.invited:${r.id}:${r.email.toLowerCase()}`,
      to: r.email,
      ...(await renderEmail(memberInvitedSubject(props), createElement(MemberInvitedEmail, props))),
    },
  ];
}

// --------------------------------------------------------------------------- daily reminder

/** The reminder goes at the site's 06:00; a run missed (no worker up) is made up until noon, site time. */
export const REMINDER_FROM_HOUR = 6;
export const REMINDER_UNTIL_HOUR = 12;

type OverduePull = {
  ownerName: string;
  siteName: string;
  pointTag: string;
  circuitTag: string;
  couponSerial: string;
  dueOn: string;
  daysOverdue: number;
};

/**
 * Coupons in service past their point's planned exposure at `asOf`, at one site, for a
 * contractor whose coupon-monitoring contract covers the site on `day` (the site's date):
 * the pull schedule's "overdue".
 */
async function overduePulls(
  conn: Db,
  q: { contractorId: string; siteId: string; day: string; asOf: Date },
): Promise<OverduePull[]> {
  const { rows } = await conn.raw<{
    rows: Array<{
      owner_name: string;
      site_name: string;
      point_tag: string;
      circuit_tag: string;
      coupon_serial: string;
      due_on: string;
      days_to_due: number;
    }>;
  }>(
    `select o.name as owner_name, s.name as site_name, p.tag as point_tag, ci.tag as circuit_tag,
            cp.serial as coupon_serial,
            to_char((e.installed_at + make_interval(days => p.planned_exposure_days)) at time zone s.time_zone, 'YYYY-MM-DD') as due_on,
            ceil(extract(epoch from (e.installed_at + make_interval(days => p.planned_exposure_days)) - :asOf::timestamptz) / 86400)::int as days_to_due
       from sites s
       join organisations o on o.id = s.owner_id
       join monitoring_points p on p.site_id = s.id and p.active and p.kind = 'coupon'
       join circuits ci on ci.id = p.circuit_id
       join coupon_exposures e on e.point_id = p.id and e.removed_at is null
       join coupons cp on cp.id = e.coupon_id
      where s.id = :siteId
        and exists (select 1 from contracts c join contract_sites cs on cs.contract_id = c.id
                     where cs.site_id = s.id and c.contractor_id = :contractorId
                       and 'coupon_monitoring' = any(c.scope)
                       and ${contractInForceOnSql(":day::date")})
      order by p.tag`,
    { siteId: q.siteId, contractorId: q.contractorId, day: q.day, asOf: q.asOf.toISOString() },
  );
  // "Overdue" as the pull schedule has it: due more than a day before (days to due below 0).
  return rows
    .filter((r) => r.days_to_due < 0)
    .map((r) => ({
      ownerName: r.owner_name,
      siteName: r.site_name,
      pointTag: r.point_tag,
      circuitTag: r.circuit_tag,
      couponSerial: r.coupon_serial,
      dueOn: r.due_on,
      daysOverdue: -r.days_to_due,
    }));
}

async function reminderMessages(
  conn: Db,
  event: Extract<NotificationEvent, { kind: "overdue.reminder" }>,
): Promise<OutboxMessage[]> {
  const { contractorId, siteId, day } = event;
  if (!/^\d{4}-\d{2}-\d{2}$/.test(day)) throw new RangeError(`day must be YYYY-MM-DD (got ${day})`);
  const pulls = await overduePulls(conn, event);
  if (pulls.length === 0) return [];
  const contractor = await conn("organisations").where({ id: contractorId, kind: "contractor" }).first("name");
  if (!contractor) return [];
  const technicians: Recipient[] = await conn("users")
    .where({ organisation_id: contractorId, role: "contractor_technician", status: "active" })
    .orderBy("email")
    .select(...recipientColumns);
  const out: OutboxMessage[] = [];
  for (const r of technicians) {
    const props = {
      recipientName: r.name,
      contractorName: contractor.name,
      ownerName: pulls[0].ownerName,
      siteName: pulls[0].siteName,
      day,
      pulls,
      pullsUrl: `${env().APP_ORIGIN}/pulls`,
    };
    out.push({
      recipientId: r.id,
      ownerId: null,
      eventKey: `overdue.reminder:${contractorId}:${siteId}:${day}:${r.email.toLowerCase()}`,
      to: r.email,
      ...(await renderEmail(overdueReminderSubject(props), createElement(OverdueReminderEmail, props))),
    });
  }
  return out;
}

/** A contractor and a site its coupon-monitoring contract covers on the site's own date. */
type CoveredSite = { contractorId: string; siteId: string; timeZone: string };

async function coveredSites(conn: Db, asOf: Date): Promise<CoveredSite[]> {
  const { rows } = await conn.raw<{ rows: Array<{ contractor_id: string; site_id: string; time_zone: string }> }>(
    `select distinct c.contractor_id, s.id as site_id, s.time_zone
       from contracts c
       join contract_sites cs on cs.contract_id = c.id
       join sites s on s.id = cs.site_id
      where 'coupon_monitoring' = any(c.scope)
        and ${contractInForceOnSql("(:asOf::timestamptz at time zone s.time_zone)::date")}
      order by c.contractor_id, s.id`,
    { asOf: asOf.toISOString() },
  );
  return rows.map((r) => ({ contractorId: r.contractor_id, siteId: r.site_id, timeZone: r.time_zone }));
}

export type ReminderRun = {
  /** The contractor–site reminders this run took on (each once per site date, ever). */
  reminders: Array<{ contractorId: string; siteId: string; day: string }>;
  /** The outbox messages written (none for a site without overdue pulls). */
  outboxIds: string[];
};

/**
 * The morning reminder, run every hour: for each contractor and each site its live
 * coupon-monitoring contracts cover where the site's clock now reads between 06:00 and
 * noon and that has not had that date's reminder, records the reminder as done
 * (overdue_reminder_days) and writes the messages, in one transaction per contractor and
 * site. The record makes the reminder once per site date: a second run, a restart or a
 * second worker running at the same moment (it waits on the first one's row, then finds
 * it) adds nothing.
 */
export async function enqueueOverdueReminders(conn: Knex, asOf: Date = new Date()): Promise<ReminderRun> {
  const run: ReminderRun = { reminders: [], outboxIds: [] };
  for (const covered of await coveredSites(conn, asOf)) {
    const day = localDayInHours(asOf, covered.timeZone, REMINDER_FROM_HOUR, REMINDER_UNTIL_HOUR);
    if (!day) continue;
    const reminder = { contractorId: covered.contractorId, siteId: covered.siteId, day };
    const ids = await conn.transaction(async (trx) => {
      const taken = await trx("overdue_reminder_days")
        .insert({ contractor_id: reminder.contractorId, site_id: reminder.siteId, day })
        .onConflict(["contractor_id", "site_id", "day"])
        .ignore()
        .returning("day");
      if (taken.length === 0) return null;
      return enqueueNotification(trx, { kind: "overdue.reminder", ...reminder, asOf });
    });
    if (ids === null) continue;
    run.reminders.push(reminder);
    run.outboxIds.push(...ids);
  }
  return run;
}
