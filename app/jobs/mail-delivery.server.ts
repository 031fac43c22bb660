import { claimOutboxMessage, recordOutboxFailure, recordOutboxSent } from "../models/email-outbox.server";
import { db, type Db } from "../services/db.server";
import { describeProviderError, sendEmail, type ProviderError } from "../services/mail.server";

/**
 * The worker of `mail.deliver`: sends one outbox message (see the email_outbox
 * migration) unless it was sent already.
 *
 * Exactly once, without holding a transaction or row lock while the provider answers:
 * the row is claimed for a short while in one statement, sent outside any transaction
 * with the row id as the provider's Idempotency-Key, and the answer recorded in another
 * statement. A retry after a crash between "provider accepted" and "sent_at recorded"
 * is answered by the provider with the first result instead of a second message.
 */

/** The provider refused or could not be reached; the job queue retries the delivery. */
export class MailDeliveryError extends Error {
  constructor(
    readonly outboxId: string,
    readonly providerError: ProviderError,
  ) {
    super(`e-mail ${outboxId} was not accepted: ${describeProviderError(providerError)}`);
    this.name = "MailDeliveryError";
  }
}

export type DeliveryOutcome =
  /** The provider accepted the message now. */
  | "sent"
  /** It had been sent before: nothing was done. */
  | "already sent"
  /** Another worker is sending it at this moment. */
  | "busy"
  /** Held for a person: it may have been sent more than a day ago (see the outbox model). */
  | "held"
  /** No such message (or its transaction has not committed). */
  | "missing";

/**
 * How long a claim keeps other workers off a message: well beyond the provider call's
 * 10 s timeout, short enough that a worker that died mid-send holds nothing for long.
 */
const CLAIM_SECONDS = 60;

/** The tag the inbox and the provider's dashboard show: "submission_submitted". */
function categoryOf(eventKey: string): string {
  return (eventKey.split(":")[0] || "notification").replace(/[^A-Za-z0-9_-]/g, "_").slice(0, 256);
}

/**
 * Sends one outbox message unless it was sent already. Throws MailDeliveryError when the
 * provider refuses or cannot be reached, after recording the attempt, so the queue tries
 * again later.
 */
export async function deliverOutboxEmail(id: string, conn: Db = db()): Promise<DeliveryOutcome> {
  const claim = await claimOutboxMessage(conn, id, CLAIM_SECONDS);
  if (!claim.claimed) return claim.state;
  const { message } = claim;
  const result = await sendEmail(
    {
      to: message.to_email,
      subject: message.subject,
      html: message.html,
      text: message.text,
      category: categoryOf(message.event_key),
    },
    { idempotencyKey: message.id },
  );
  if (!result.ok) {
    await recordOutboxFailure(conn, id, describeProviderError(result.error));
    throw new MailDeliveryError(id, result.error);
  }
  await recordOutboxSent(conn, id, result.providerId);
  return "sent";
}
