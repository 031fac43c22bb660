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
import { OverdueReminderEmail, overdueReminderSubject } from "../emails/overdue-reminder";
import { renderEmail } from "../emails/render.server";
import { CAUTION, SeriousResultEmail, seriousResultSubject } from "../emails/serious-result";
import type { Db } from "../services/db.server";
import { env } from "../services/env.server";
import { ACTIVE_CONTRACT_SQL } from "./contract-coverage.server";

/**
 * E-mail notifications, written to the outbox (email_outbox) inside the caller's
 * transaction, so a message exists exactly when the change that causes it commits.
 * Delivery is the job queue's business (app/jobs/queue.server.ts); when the queue
 * runs in this process it is told about new messages right after the commit.
 *
 * Who hears about what:
 * - a submission sent for review → every active integrity engineer of the owner;
 * - a submission returned or approved → the technician who submitted it;
 * - a submission approved with a high or severe result → also the owner's integrity
 *   engineers and plant managers, with the engineering caution;
 * - every day → each contractor's technicians, the pulls that are overdue at the sites
 *   its live coupon-monitoring contracts cover.
 * Each message is one recipient's, keyed by event and address, so repeating an event
 * (a retried job, a second run of the daily reminder) adds nothing. The words and the
 * HTML and text parts come from the components in app/emails.
 */

export type NotificationEvent =
  | { kind: "submission.submitted"; submissionId: string }
  | { kind: "submission.returned"; submissionId: string }
  | { kind: "submission.approved"; submissionId: string }
  /** An approved submission reopened as a correction (`submissionId` is the correction's). */
  | { kind: "submission.correction_opened"; submissionId: string }
  /** `day` is the reminder's UTC date, YYYY-MM-DD: one reminder per contractor per day. */
  | { kind: "overdue.reminder"; contractorId: string; day: string };

type OutboxMessage = {
  ownerId: string | null;
  eventKey: string;
  to: string;
  subject: string;
  html: string;
  text: string;
};

type Recipient = { email: string; name: string; units: "si" | "us"; role: string };

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
      ? await reminderMessages(trx, event.contractorId, event.day)
      : await submissionMessages(trx, event);
  const ids = await writeOutbox(trx, messages);
  announceAfterCommit(trx, ids);
  return ids;
}

// --------------------------------------------------------------------------- submissions

type SubmissionFacts = {
  id: string;
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
      "d.name as decided_by_name",
      conn.raw("(select count(*)::int from coupon_results r where r.submission_id = sub.id) as result_count"),
    );
  if (!r) throw new Error(`no submission ${submissionId} to notify about`);
  return {
    id: r.id,
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
    submittedBy: r.submitted_by,
    decidedByName: r.decided_by_name,
  };
}

async function ownerStaff(conn: Db, ownerId: string, roles: string[]): Promise<Recipient[]> {
  return conn("users")
    .where({ organisation_id: ownerId, status: "active" })
    .whereIn("role", roles)
    .orderBy("email")
    .select("email", "name", "units", "role");
}

async function activeUser(conn: Db, userId: string | null): Promise<Recipient[]> {
  if (!userId) return [];
  return conn("users").where({ id: userId, status: "active" }).select("email", "name", "units", "role");
}

type SeriousResult = {
  pointTag: string;
  couponSerial: string;
  generalMmY: number;
  pittingMmY: number | null;
  general: string;
  pitting: string | null;
  worst: string;
};

async function seriousResults(conn: Db, submissionId: string): Promise<SeriousResult[]> {
  const { rows } = await conn.raw<{
    rows: Array<{
      point_tag: string;
      serial: string;
      general_mm_y: number;
      pitting_mm_y: number | null;
      general_severity: string;
      pitting_severity: string | null;
      worst: string;
    }>;
  }>(
    `select p.tag as point_tag, cp.serial,
            (r.computed->'rate'->>'mmPerYear')::float8 as general_mm_y,
            (r.computed->'pitting'->>'mmPerYear')::float8 as pitting_mm_y,
            r.general_severity, r.pitting_severity, r.computed->'severity'->>'worst' as worst
       from coupon_results r
       join coupon_exposures e on e.id = r.exposure_id
       join coupons cp on cp.id = e.coupon_id
       join monitoring_points p on p.id = e.point_id
      where r.submission_id = ? and r.computed->'severity'->>'worst' in ('high', 'severe')
      order by p.tag`,
    [submissionId],
  );
  return rows.map((r) => ({
    pointTag: r.point_tag,
    couponSerial: r.serial,
    generalMmY: r.general_mm_y,
    pittingMmY: r.pitting_mm_y,
    general: r.general_severity,
    pitting: r.pitting_severity,
    worst: r.worst,
  }));
}

async function submissionMessages(
  conn: Db,
  event: Exclude<NotificationEvent, { kind: "overdue.reminder" }>,
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
      };
      out.push({
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
      };
      out.push({
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
    };
    out.push({
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
    for (const r of await ownerStaff(conn, p.ownerId, ["integrity_engineer", "plant_manager"])) {
      const props = {
        recipientName: r.name,
        recipientRole: r.role,
        units: r.units,
        reference: p.reference,
        ownerName: p.ownerName,
        contractorName: p.contractorName,
        siteName: p.siteName,
        decidedBy: decidedBy(p),
        worstSeverity: p.worstSeverity,
        results,
        reviewUrl,
      };
      out.push({
        ownerId: p.ownerId,
        eventKey: key("submission.approved-serious", r),
        to: r.email,
        ...(await renderEmail(seriousResultSubject(props), createElement(SeriousResultEmail, props))),
      });
    }
  }
  return out;
}

/** The engineering caution the serious-result message carries (its words live with the message). */
export { CAUTION };

// --------------------------------------------------------------------------- daily reminder

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
 * Coupons in service past their point's planned exposure, at the sites a contractor's
 * live coupon-monitoring contracts cover (the pull schedule's "overdue", for every such
 * contractor at once, or for one).
 */
async function overduePulls(
  conn: Db,
  contractorId: string | null,
): Promise<Array<OverduePull & { contractorId: string }>> {
  const { rows } = await conn.raw<{
    rows: Array<{
      contractor_id: string;
      owner_name: string;
      site_name: string;
      point_tag: string;
      circuit_tag: string;
      coupon_serial: string;
      due_on: string;
      days_to_due: number;
    }>;
  }>(
    `with covered as (
       select distinct c.contractor_id, cs.site_id
         from contracts c
         join contract_sites cs on cs.contract_id = c.id
        where ${ACTIVE_CONTRACT_SQL}
          and 'coupon_monitoring' = any(c.scope)
          and (?::uuid is null or c.contractor_id = ?::uuid)
     ), pulls as (
       select cv.contractor_id, o.name as owner_name, s.name as site_name, p.tag as point_tag, ci.tag as circuit_tag,
              cp.serial as coupon_serial,
              to_char((e.installed_at + make_interval(days => p.planned_exposure_days)) at time zone s.time_zone, 'YYYY-MM-DD') as due_on,
              ceil(extract(epoch from (e.installed_at + make_interval(days => p.planned_exposure_days)) - now()) / 86400)::int as days_to_due
         from covered cv
         join sites s on s.id = cv.site_id
         join organisations o on o.id = s.owner_id
         join monitoring_points p on p.site_id = s.id and p.active and p.kind = 'coupon'
         join circuits ci on ci.id = p.circuit_id
         join coupon_exposures e on e.point_id = p.id and e.removed_at is null
         join coupons cp on cp.id = e.coupon_id
     )
     select * from pulls where days_to_due < 0 order by contractor_id, owner_name, site_name, point_tag`,
    [contractorId, contractorId],
  );
  return rows.map((r) => ({
    contractorId: r.contractor_id,
    ownerName: r.owner_name,
    siteName: r.site_name,
    pointTag: r.point_tag,
    circuitTag: r.circuit_tag,
    couponSerial: r.coupon_serial,
    dueOn: r.due_on,
    daysOverdue: -r.days_to_due,
  }));
}

async function reminderMessages(conn: Db, contractorId: string, day: string): Promise<OutboxMessage[]> {
  if (!/^\d{4}-\d{2}-\d{2}$/.test(day)) throw new RangeError(`day must be YYYY-MM-DD (got ${day})`);
  const pulls = await overduePulls(conn, contractorId);
  if (pulls.length === 0) return [];
  const contractor = await conn("organisations").where({ id: contractorId, kind: "contractor" }).first("name");
  if (!contractor) return [];
  const technicians: Recipient[] = await conn("users")
    .where({ organisation_id: contractorId, role: "contractor_technician", status: "active" })
    .orderBy("email")
    .select("email", "name", "units", "role");
  const out: OutboxMessage[] = [];
  for (const r of technicians) {
    const props = {
      recipientName: r.name,
      contractorName: contractor.name,
      day,
      pulls,
      pullsUrl: `${env().APP_ORIGIN}/pulls`,
    };
    out.push({
      ownerId: null,
      eventKey: `overdue.reminder:${contractorId}:${day}:${r.email.toLowerCase()}`,
      to: r.email,
      ...(await renderEmail(overdueReminderSubject(props), createElement(OverdueReminderEmail, props))),
    });
  }
  return out;
}

/**
 * The daily reminder for every contractor with overdue pulls, one transaction per
 * contractor. Running it twice on one day adds nothing. Returns the ids written.
 */
export async function enqueueOverdueReminders(
  conn: Knex,
  day: string = new Date().toISOString().slice(0, 10),
): Promise<string[]> {
  const contractors = [...new Set((await overduePulls(conn, null)).map((p) => p.contractorId))];
  const ids: string[] = [];
  for (const contractorId of contractors) {
    ids.push(
      ...(await conn.transaction((trx) => enqueueNotification(trx, { kind: "overdue.reminder", contractorId, day }))),
    );
  }
  return ids;
}
