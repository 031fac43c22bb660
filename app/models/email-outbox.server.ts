import type { Db } from "../services/db.server";
import { auditedWrite, type Actor } from "./audit.server";

/**
 * The rows of the e-mail outbox as delivery sees them: claim one for sending, record
 * what the provider answered, note that it was queued, and find what the queue lost.
 * Messages are written by notifications.server.ts inside the transaction of the change
 * that causes them.
 *
 * These functions run for the job queue, not for a signed-in person, so they act on a
 * message by its id across tenants; nothing here is reachable from a request.
 *
 * Exactly once without holding a lock across the provider's HTTP call: a claim is one
 * short UPDATE that takes an unsent, unclaimed row for a few seconds; the call to the
 * provider happens outside any transaction with the row id as the Idempotency-Key; the
 * answer is recorded by another short UPDATE that only ever sets sent_at once. A worker
 * that dies mid-send leaves a claim that runs out, and the next try is answered by the
 * provider with the first result.
 */

export type EmailOutboxRow = {
  id: string;
  owner_id: string | null;
  event_key: string;
  to_email: string;
  subject: string;
  html: string;
  text: string;
  created_at: Date;
  queued_at: Date | null;
  attempts: number;
  last_attempt_at: Date | null;
  last_error: string | null;
  sent_at: Date | null;
  provider_id: string | null;
  claimed_until: Date | null;
  held_at: Date | null;
  held_reason: string | null;
};

/** What a worker needs to send a claimed message. */
export type ClaimedMessage = Pick<EmailOutboxRow, "id" | "event_key" | "to_email" | "subject" | "html" | "text">;

export type ClaimOutcome =
  | { claimed: true; message: ClaimedMessage }
  /**
   * missing: no such message (or its transaction has not committed);
   * already sent: nothing to do; busy: another worker holds a live claim.
   */
  | { claimed: false; state: "missing" | "already sent" | "busy" | "held" };

/**
 * The provider keeps an Idempotency-Key for 24 hours. A message first tried longer ago
 * than this and still not recorded as sent may have been accepted in an answer that was
 * lost; a new call could not be matched to it, so the message is held for a person.
 */
export const IDEMPOTENCY_SAFE_HOURS = 23;

/** After this many provider calls the sweep stops and the message waits for a person (last_error says why). */
export const OUTBOX_MAX_ATTEMPTS = 40;

/** Any uuid the column can hold (a malformed id would make Postgres refuse the query). */
const uuid = /^[0-9a-f]{8}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{12}$/i;

const claimedColumns = ["id", "event_key", "to_email", "subject", "html", "text"] as const;

/**
 * Takes the message for `leaseSeconds` and counts the provider call about to be made
 * (attempts + 1, last_attempt_at). Only an unsent message whose claim is absent or has
 * run out can be taken, so two workers never send at the same time.
 */
export async function claimOutboxMessage(conn: Db, id: string, leaseSeconds: number): Promise<ClaimOutcome> {
  if (!uuid.test(id)) return { claimed: false, state: "missing" };
  const held = await conn<EmailOutboxRow>("email_outbox")
    .where({ id })
    .whereNull("sent_at")
    .whereNull("held_at")
    .where("attempts", ">", 0)
    .whereRaw("created_at < now() - make_interval(hours => ?)", [IDEMPOTENCY_SAFE_HOURS])
    .update({
      held_at: conn.fn.now(),
      held_reason:
        "Tried more than a day ago without a recorded answer from the mail service: it may have arrived. Check with the recipient before sending it again.",
    })
    .returning("id");
  if (held.length) return { claimed: false, state: "held" };
  const [message] = await conn<EmailOutboxRow>("email_outbox")
    .where({ id })
    .whereNull("sent_at")
    .whereNull("held_at")
    .where((q) => q.whereNull("claimed_until").orWhere("claimed_until", "<=", conn.fn.now()))
    .update({
      claimed_until: conn.raw("now() + make_interval(secs => ?)", [leaseSeconds]),
      attempts: conn.raw("attempts + 1"),
      last_attempt_at: conn.fn.now(),
    })
    .returning([...claimedColumns]);
  if (message) return { claimed: true, message };
  const row = await conn<EmailOutboxRow>("email_outbox").where({ id }).first("sent_at", "held_at");
  if (!row) return { claimed: false, state: "missing" };
  return { claimed: false, state: row.sent_at ? "already sent" : row.held_at ? "held" : "busy" };
}

/** The provider accepted the message: sent_at is set once (a late second answer changes nothing). */
export async function recordOutboxSent(conn: Db, id: string, providerId: string): Promise<void> {
  await conn<EmailOutboxRow>("email_outbox")
    .where({ id })
    .whereNull("sent_at")
    .update({ sent_at: conn.fn.now(), provider_id: providerId, claimed_until: null });
}

/** The provider refused or could not be reached: the reason is kept and the claim let go, so a retry may send. */
export async function recordOutboxFailure(conn: Db, id: string, reason: string): Promise<void> {
  await conn<EmailOutboxRow>("email_outbox")
    .where({ id })
    .whereNull("sent_at")
    .update({ last_error: reason, claimed_until: null });
}

/** Notes that these messages were handed to the job queue now. */
export async function markOutboxQueued(conn: Db, ids: readonly string[]): Promise<void> {
  if (ids.length === 0) return;
  await conn<EmailOutboxRow>("email_outbox")
    .whereIn("id", [...ids])
    .update({ queued_at: conn.fn.now() });
}

export type LeftBehindQuery = {
  /** Messages that reached this many provider calls wait for a person instead. */
  maxAttempts: number;
  /** A message queued longer ago than this (a Postgres interval, "5 minutes") may be queued again. */
  requeueAfter: string;
  /** The job table of the queue (`<schema>.job`) and the name of the delivery queue in it. */
  jobTable: string;
  jobName: string;
  limit: number;
};

/**
 * Unsent messages that no live delivery job carries (a crash between commit and
 * queueing, a delivery that ran out of retries during a long outage), oldest first.
 */
export async function outboxLeftBehind(conn: Db, query: LeftBehindQuery): Promise<string[]> {
  return conn<EmailOutboxRow>("email_outbox as o")
    .whereNull("o.sent_at")
    .whereNull("o.held_at")
    .where("o.attempts", "<", query.maxAttempts)
    .where((q) => q.whereNull("o.queued_at").orWhereRaw("o.queued_at < now() - ?::interval", [query.requeueAfter]))
    .whereNotExists((q) =>
      q
        .select(conn.raw("1"))
        .from(`${query.jobTable} as j`)
        .where("j.name", query.jobName)
        .whereRaw("j.singleton_key = o.id::text")
        .whereIn("j.state", ["created", "retry", "active"]),
    )
    .orderBy("o.created_at")
    .limit(query.limit)
    .pluck("o.id");
}

export type UndeliveredMessage = {
  id: string;
  toEmail: string;
  subject: string;
  createdAt: string;
  attempts: number;
  lastError: string | null;
  why: string;
};

/**
 * This owner's messages that wait for a person: held (see IDEMPOTENCY_SAFE_HOURS) or out
 * of attempts after a long outage. Newest first.
 */
export async function undeliveredMessages(
  conn: Db,
  ownerId: string,
  maxAttempts: number,
): Promise<UndeliveredMessage[]> {
  const rows: EmailOutboxRow[] = await conn<EmailOutboxRow>("email_outbox")
    .where({ owner_id: ownerId })
    .whereNull("sent_at")
    .where((q) => q.whereNotNull("held_at").orWhere("attempts", ">=", maxAttempts))
    .orderBy("created_at", "desc")
    .limit(100)
    .select("id", "to_email", "subject", "created_at", "attempts", "last_error", "held_reason");
  return rows.map((r) => ({
    id: r.id,
    toEmail: r.to_email,
    subject: r.subject,
    createdAt: new Date(r.created_at).toISOString(),
    attempts: r.attempts,
    lastError: r.last_error,
    why: r.held_reason ?? `The mail service refused it ${r.attempts} times.`,
  }));
}

/**
 * An administrator sends a waiting message again: the hold and the count are cleared and
 * the sweep queues it within a minute. Only this owner's unsent messages; audited.
 */
export async function releaseUndelivered(
  conn: Db,
  who: { ownerId: string; actor: Actor; requestId?: string | null },
  id: string,
): Promise<{ released: boolean; toEmail?: string }> {
  if (!uuid.test(id)) return { released: false };
  return auditedWrite(conn, who, async ({ trx, record }) => {
    const [row] = await trx<EmailOutboxRow>("email_outbox")
      .where({ id, owner_id: who.ownerId })
      .whereNull("sent_at")
      .update({ held_at: null, held_reason: null, attempts: 0, queued_at: null, last_error: null })
      .returning(["id", "to_email", "subject"]);
    if (!row) return { released: false };
    await record({
      action: "email.released",
      recordType: "email",
      recordId: row.id,
      after: { to: row.to_email, subject: row.subject },
    });
    return { released: true, toEmail: row.to_email };
  });
}
