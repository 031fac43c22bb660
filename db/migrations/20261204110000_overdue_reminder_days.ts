import type { Knex } from "knex";

/**
 * The morning reminder of overdue pulls, once per contractor, site and site date: a row
 * here says that date's reminder was taken on (its e-mails, if any pulls were overdue,
 * were written to the outbox in the same transaction). The hourly job inserts the row
 * first; a second run or a second worker finds it and sends nothing.
 */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable("overdue_reminder_days", (t) => {
    t.uuid("contractor_id")
      .notNullable()
      .references("id")
      .inTable("organisations")
      .onDelete("CASCADE")
      .withKeyName("overdue_reminder_days_contractor_fkey");
    t.uuid("site_id")
      .notNullable()
      .references("id")
      .inTable("sites")
      .onDelete("CASCADE")
      .withKeyName("overdue_reminder_days_site_fkey");
    t.date("day").notNullable().comment("the site's own date of the reminder");
    t.timestamp("done_at", { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.primary(["contractor_id", "site_id", "day"], { constraintName: "overdue_reminder_days_pkey" });
  });
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.dropTable("overdue_reminder_days");
}
