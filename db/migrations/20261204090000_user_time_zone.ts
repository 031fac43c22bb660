import type { Knex } from "knex";

/**
 * The time zone a person reads organisation-wide pages in (the audit trail, people).
 * A site's own records are always shown in that site's zone; null means "the zone of
 * the organisation's first site, or UTC when it has none".
 */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.alterTable("users", (t) => {
    t.text("time_zone")
      .nullable()
      .comment("IANA time zone for organisation-wide pages; null: first site's zone or UTC");
  });
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.alterTable("users", (t) => {
    t.dropColumn("time_zone");
  });
}
