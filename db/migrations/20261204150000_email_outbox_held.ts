import type { Knex } from "knex";

/**
 * A message can be held for a person: when the provider's idempotency window (24 h) has
 * passed since the message was first tried and it is still not recorded as sent, a new
 * call could send it twice, so delivery stops and an administrator decides (the people
 * page lists held messages and messages that ran out of attempts).
 */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.alterTable("email_outbox", (t) => {
    t.timestamp("held_at", { useTz: true }).comment("delivery stopped for a person to decide; null = may be sent");
    t.text("held_reason").comment("why delivery stopped, in words for the administrator");
    t.check("held_at is null or held_reason is not null", [], "email_outbox_held_check");
  });
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.alterTable("email_outbox", (t) => {
    t.dropChecks(["email_outbox_held_check"]);
    t.dropColumns("held_at", "held_reason");
  });
}
