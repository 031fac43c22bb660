import type { Knex } from "knex";

/**
 * E-mail notifications go through an outbox: a message is written here in the same
 * transaction as the change that causes it (a packet submitted, returned, approved…),
 * and the job queue (pg-boss, its own schema `pgboss`) delivers it afterwards. A crash
 * after the commit or a mail-provider outage therefore loses nothing: an unsent row is
 * picked up again by the minute sweep. `event_key` makes every notification happen once
 * per recipient, and `sent_at` (set under a row lock, with the row id as the provider's
 * idempotency key) keeps a message from being sent twice.
 */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable("email_outbox", (t) => {
    t.uuid("id").primary({ constraintName: "email_outbox_pkey" }).defaultTo(knex.raw("gen_random_uuid()"));
    t.uuid("owner_id")
      .references("id")
      .inTable("organisations")
      .onDelete("RESTRICT")
      .withKeyName("email_outbox_owner_fkey")
      .comment("the owner whose record caused the message; null for a contractor's reminder that spans owners");
    t.text("event_key")
      .notNullable()
      .comment(
        "what caused the message and for whom, e.g. submission.submitted:<id>:rev2:<address>; a repeat is ignored",
      );
    t.text("to_email").notNullable();
    t.text("subject").notNullable();
    t.text("html").notNullable();
    t.text("text").notNullable().comment("the plain-text body, same content as the HTML");
    t.timestamp("created_at", { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.timestamp("queued_at", { useTz: true }).comment("last time the message was handed to the job queue");
    t.integer("attempts").notNullable().defaultTo(0).comment("calls made to the mail provider, successful or not");
    t.timestamp("last_attempt_at", { useTz: true });
    t.text("last_error").comment("the provider's answer to the last failed attempt");
    t.timestamp("sent_at", { useTz: true }).comment("when the provider accepted the message; set once");
    t.text("provider_id").comment("the provider's id for the accepted message");
    t.unique(["event_key"], { indexName: "email_outbox_event_key_key" });
    t.check("attempts >= 0", [], "email_outbox_attempts_check");
    t.check("length(trim(subject)) > 0", [], "email_outbox_subject_check");
    t.check("to_email ~ '^[^@\\s]+@[^@\\s]+\\.[^@\\s]+$'", [], "email_outbox_to_email_check");
    t.check("sent_at is null or provider_id is not null", [], "email_outbox_sent_check");
  });
  // The sweep reads only what is still unsent.
  await knex.raw("create index email_outbox_unsent_idx on email_outbox (created_at) where sent_at is null");
  await knex.raw("create index email_outbox_owner_idx on email_outbox (owner_id, created_at)");
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.dropTableIfExists("email_outbox");
}
