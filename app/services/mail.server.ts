import type { Knex } from "knex";
import { Resend } from "resend";
import { db } from "./db.server";
import { env } from "./env.server";

/**
 * Delivery of outbox messages (see the email_outbox migration) through the Resend SDK.
 * Locally RESEND_BASE_URL points at fake-services/mail.ts; in production at Resend.
 *
 * Exactly once: the row is locked while it is sent, a row already marked sent is left
 * alone, and the row id travels as the provider's Idempotency-Key, so a retry after a
 * crash between "provider accepted" and "sent_at committed" is answered with the first
 * result instead of a second message.
 */

let client: { resend: Resend; key: string; baseUrl: string } | undefined;

function mailer(): Resend {
  const { RESEND_API_KEY: key, RESEND_BASE_URL: baseUrl } = env();
  // Rebuilt when the settings change (tests point the environment at their own fake).
  if (!client || client.key !== key || client.baseUrl !== baseUrl) {
    client = { resend: new Resend(key, { baseUrl: baseUrl.replace(/\/$/, "") }), key, baseUrl };
  }
  return client.resend;
}

/** The provider refused or could not be reached; the job queue retries the delivery. */
export class MailDeliveryError extends Error {
  constructor(
    readonly outboxId: string,
    readonly providerError: { name: string; message: string; statusCode: number | null },
  ) {
    super(`e-mail ${outboxId} was not accepted: ${describe(providerError)}`);
    this.name = "MailDeliveryError";
  }
}

function describe(e: { name: string; message: string; statusCode: number | null }): string {
  return `${e.statusCode ?? "no answer"} ${e.name}: ${e.message}`.slice(0, 2000);
}

export type DeliveryOutcome =
  /** The provider accepted the message now. */
  | "sent"
  /** It had been sent before: nothing was done. */
  | "already sent"
  /** Another worker is sending it at this moment. */
  | "busy"
  /** No such message (or its transaction has not committed). */
  | "missing";

const uuid = /^[0-9a-f]{8}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{12}$/i;
const SEND_TIMEOUT_MS = 10_000;

/** The tag the inbox and the provider's dashboard show: "submission_submitted". */
function categoryOf(eventKey: string): string {
  return (eventKey.split(":")[0] || "notification").replace(/[^A-Za-z0-9_-]/g, "_").slice(0, 256);
}

/**
 * Sends one outbox message unless it was sent already. Throws MailDeliveryError when the
 * provider refuses (the SDK reports errors in its result and never throws), after
 * recording the attempt, so the queue tries again later.
 */
export async function deliverOutboxEmail(id: string, conn: Knex = db()): Promise<DeliveryOutcome> {
  if (!uuid.test(id)) return "missing";
  const outcome = await conn.transaction(async (trx) => {
    const row = await trx("email_outbox")
      .where({ id })
      .forUpdate()
      .skipLocked()
      .first("id", "event_key", "to_email", "subject", "html", "text", "sent_at");
    if (!row) {
      const exists = await trx("email_outbox").where({ id }).first("id");
      return { kind: exists ? ("busy" as const) : ("missing" as const) };
    }
    if (row.sent_at) return { kind: "already sent" as const };

    const { data, error } = await mailer().emails.send(
      {
        from: env().MAIL_FROM,
        to: [row.to_email],
        subject: row.subject,
        html: row.html,
        text: row.text,
        tags: [{ name: "category", value: categoryOf(row.event_key) }],
      },
      { idempotencyKey: row.id, signal: AbortSignal.timeout(SEND_TIMEOUT_MS) },
    );
    if (error || !data) {
      const providerError = error ?? {
        name: "application_error",
        message: "the provider answered without a message id",
        statusCode: null,
      };
      await trx("email_outbox")
        .where({ id })
        .update({
          attempts: trx.raw("attempts + 1"),
          last_attempt_at: trx.fn.now(),
          last_error: describe(providerError),
        });
      return { kind: "failed" as const, providerError };
    }
    await trx("email_outbox")
      .where({ id })
      .update({
        attempts: trx.raw("attempts + 1"),
        last_attempt_at: trx.fn.now(),
        sent_at: trx.fn.now(),
        provider_id: data.id,
      });
    return { kind: "sent" as const };
  });
  // Thrown after the commit, so the failed attempt stays recorded.
  if (outcome.kind === "failed") throw new MailDeliveryError(id, outcome.providerError);
  return outcome.kind;
}
