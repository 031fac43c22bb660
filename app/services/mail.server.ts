import { Resend } from "resend";
import { env } from "./env.server";

/**
 * The mail provider, through the Resend SDK. Locally RESEND_BASE_URL points at
 * fake-services/mail.ts; in production at Resend. This adapter only sends: which
 * message, when, and what its answer means for the outbox is app/jobs/mail-delivery.
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

export type ProviderError = { name: string; message: string; statusCode: number | null };

export type OutgoingEmail = {
  to: string;
  subject: string;
  html: string;
  text: string;
  /** The tag the inbox and the provider's dashboard show. */
  category: string;
};

export type SendResult = { ok: true; providerId: string } | { ok: false; error: ProviderError };

const SEND_TIMEOUT_MS = 10_000;

/** One line for logs and the outbox's last_error. */
export function describeProviderError(e: ProviderError): string {
  return `${e.statusCode ?? "no answer"} ${e.name}: ${e.message}`.slice(0, 2000);
}

/**
 * Sends one message. The provider answers a repeated `idempotencyKey` with its first
 * result instead of sending again. Never throws: a refusal, no answer within 10 s or a
 * broken connection comes back as `{ ok: false }`.
 */
export async function sendEmail(message: OutgoingEmail, options: { idempotencyKey: string }): Promise<SendResult> {
  try {
    const { data, error } = await mailer().emails.send(
      {
        from: env().MAIL_FROM,
        to: [message.to],
        subject: message.subject,
        html: message.html,
        text: message.text,
        tags: [{ name: "category", value: message.category }],
      },
      { idempotencyKey: options.idempotencyKey, signal: AbortSignal.timeout(SEND_TIMEOUT_MS) },
    );
    if (error) return { ok: false, error };
    if (!data) {
      return {
        ok: false,
        error: { name: "application_error", message: "the provider answered without a message id", statusCode: null },
      };
    }
    return { ok: true, providerId: data.id };
  } catch (thrown) {
    const e = thrown instanceof Error ? thrown : new Error(String(thrown));
    return { ok: false, error: { name: e.name, message: e.message, statusCode: null } };
  }
}
