import type { Knex } from "knex";

/**
 * Whether a circuit's outside diameter and nominal wall were entered or read from the pipe
 * tables (ASME B36.10M / B36.19M) by its NPS and schedule, so the screen can say which.
 */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.alterTable("circuits", (t) => {
    t.boolean("outside_diameter_from_table")
      .notNullable()
      .defaultTo(false)
      .comment("true: outside_diameter_mm was read from the pipe table by NPS (none was entered)");
    t.boolean("nominal_wall_from_table")
      .notNullable()
      .defaultTo(false)
      .comment("true: nominal_wall_mm was read from the pipe table by NPS and schedule (none was entered)");
  });
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.alterTable("circuits", (t) => {
    t.dropColumns("outside_diameter_from_table", "nominal_wall_from_table");
  });
}
