import type { Knex } from "knex";

/**
 * The owner's severity thresholds for coupons of other material families than carbon
 * steel (SP0775's bands are a carbon-steel, oilfield convention): one row per family and
 * rate kind, in mm/y. A family without a row is not graded.
 */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable("owner_family_thresholds", (t) => {
    t.uuid("owner_id").notNullable().references("id").inTable("organisations").onDelete("CASCADE");
    t.text("family").notNullable().comment("material family, e.g. stainless-steel (app/domain MATERIAL_FAMILIES)");
    t.text("kind").notNullable().comment("general or pitting");
    t.decimal("moderate_mm_y", 10, 4).notNullable().comment("moderate from this rate, mm/y");
    t.decimal("high_mm_y", 10, 4).notNullable().comment("high from this rate, mm/y");
    t.decimal("severe_mm_y", 10, 4).notNullable().comment("severe above this rate, mm/y");
    t.timestamp("updated_at", { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.primary(["owner_id", "family", "kind"], { constraintName: "owner_family_thresholds_pkey" });
  });
  await knex.raw(`alter table owner_family_thresholds
    add constraint owner_family_thresholds_kind_check check (kind in ('general', 'pitting')),
    add constraint owner_family_thresholds_family_check check (family <> 'carbon-steel'),
    add constraint owner_family_thresholds_order_check check (0 < moderate_mm_y and moderate_mm_y < high_mm_y and high_mm_y <= severe_mm_y)`);
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.dropTable("owner_family_thresholds");
}
