import type { Knex } from "knex";

/**
 * A worker claims an outbox message for a short while before it calls the mail
 * provider, instead of holding a row lock (and a pooled connection in a transaction)
 * across the HTTP call. A claim that runs out (the worker died mid-send) lets another
 * worker try; the row id as the provider's Idempotency-Key still answers a repeat with
 * the first result, so a message is never sent twice.
 */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.alterTable("email_outbox", (t) => {
    t.timestamp("claimed_until", { useTz: true }).comment(
      "a worker is sending the message until then; null or past: free to send",
    );
  });
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.alterTable("email_outbox", (t) => {
    t.dropColumn("claimed_until");
  });
}
