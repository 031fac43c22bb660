import type { Knex } from "knex";

/**
 * Coupon monitoring: the owner's plant hierarchy (site → process unit → circuit →
 * monitoring point), the coupons in stock, their exposures at points, contractors'
 * submissions and the lab results they carry. Physical invariants are CHECKs; time
 * overlaps at a point are refused by an exclusion constraint.
 */
export async function up(knex: Knex): Promise<void> {
  await knex.raw("create extension if not exists btree_gist");

  await knex.schema.createTable("process_units", (t) => {
    t.uuid("id").primary({ constraintName: "process_units_pkey" }).defaultTo(knex.raw("gen_random_uuid()"));
    t.uuid("site_id")
      .notNullable()
      .references("id")
      .inTable("sites")
      .onDelete("RESTRICT")
      .withKeyName("process_units_site_fkey");
    t.text("tag").notNullable();
    t.text("description").notNullable().defaultTo("");
    t.timestamps(true, true);
    t.unique(["site_id", "tag"], { indexName: "process_units_site_tag_key" });
    t.check("length(trim(tag)) > 0", [], "process_units_tag_check");
  });

  await knex.schema.createTable("circuits", (t) => {
    t.uuid("id").primary({ constraintName: "circuits_pkey" }).defaultTo(knex.raw("gen_random_uuid()"));
    t.uuid("unit_id")
      .notNullable()
      .references("id")
      .inTable("process_units")
      .onDelete("RESTRICT")
      .withKeyName("circuits_unit_fkey");
    t.uuid("site_id")
      .notNullable()
      .references("id")
      .inTable("sites")
      .onDelete("RESTRICT")
      .withKeyName("circuits_site_fkey")
      .comment("denormalised from the unit for tenant filters");
    t.text("tag").notNullable();
    t.text("description").notNullable().defaultTo("");
    t.text("material_code").notNullable().comment("key into the calculation library's materials table");
    t.text("service").notNullable().defaultTo("").comment("process fluid, e.g. sour water, crude overhead");
    t.timestamps(true, true);
    t.unique(["site_id", "tag"], { indexName: "circuits_site_tag_key" });
    t.check("length(trim(tag)) > 0", [], "circuits_tag_check");
  });

  await knex.schema.createTable("monitoring_points", (t) => {
    t.uuid("id").primary({ constraintName: "monitoring_points_pkey" }).defaultTo(knex.raw("gen_random_uuid()"));
    t.uuid("owner_id")
      .notNullable()
      .references("id")
      .inTable("organisations")
      .onDelete("RESTRICT")
      .withKeyName("monitoring_points_owner_fkey");
    t.uuid("site_id")
      .notNullable()
      .references("id")
      .inTable("sites")
      .onDelete("RESTRICT")
      .withKeyName("monitoring_points_site_fkey");
    t.uuid("circuit_id")
      .notNullable()
      .references("id")
      .inTable("circuits")
      .onDelete("RESTRICT")
      .withKeyName("monitoring_points_circuit_fkey");
    t.text("tag").notNullable();
    t.text("kind").notNullable().defaultTo("coupon").comment("coupon: a coupon position in an access fitting");
    t.text("access_fitting")
      .notNullable()
      .defaultTo("")
      .comment("fitting type or number, e.g. 2-in high-pressure access fitting AF-12");
    t.text("orientation")
      .notNullable()
      .defaultTo("")
      .comment("clock position / location, e.g. bottom of line, 6 o'clock");
    t.text("mounting").notNullable().defaultTo("flush");
    t.integer("planned_exposure_days").notNullable().defaultTo(90);
    t.boolean("active").notNullable().defaultTo(true);
    t.timestamps(true, true);
    t.unique(["owner_id", "tag"], { indexName: "monitoring_points_owner_tag_key" });
    t.check("kind in ('coupon')", [], "monitoring_points_kind_check");
    t.check("mounting in ('flush', 'intrusive')", [], "monitoring_points_mounting_check");
    t.check("planned_exposure_days between 7 and 730", [], "monitoring_points_exposure_check");
  });
  await knex.raw("create index monitoring_points_site_idx on monitoring_points (site_id)");

  await knex.schema.createTable("coupons", (t) => {
    t.uuid("id").primary({ constraintName: "coupons_pkey" }).defaultTo(knex.raw("gen_random_uuid()"));
    t.uuid("owner_id")
      .notNullable()
      .references("id")
      .inTable("organisations")
      .onDelete("RESTRICT")
      .withKeyName("coupons_owner_fkey");
    t.text("serial").notNullable();
    t.text("material_code").notNullable();
    t.decimal("density_g_cm3", 6, 3).notNullable().comment("snapshot of the density used for this coupon's rates");
    t.text("density_source").notNullable();
    t.text("shape").notNullable();
    t.decimal("length_mm", 8, 3);
    t.decimal("width_mm", 8, 3);
    t.decimal("thickness_mm", 8, 3);
    t.decimal("diameter_mm", 8, 3);
    t.decimal("hole_diameter_mm", 8, 3).notNullable().defaultTo(0);
    t.integer("exposed_ends");
    t.decimal("initial_mass_g", 12, 4).notNullable().comment("pre-exposure mass to 0.1 mg");
    t.decimal("balance_resolution_g", 10, 5).notNullable().defaultTo(0.0001);
    t.text("lot").notNullable().defaultTo("");
    t.text("certificate").notNullable().defaultTo("");
    t.timestamps(true, true);
    t.unique(["owner_id", "serial"], { indexName: "coupons_owner_serial_key" });
    t.check("shape in ('strip', 'disc', 'rod', 'flush-disc')", [], "coupons_shape_check");
    t.check("density_g_cm3 > 0", [], "coupons_density_check");
    t.check("initial_mass_g > 0", [], "coupons_mass_check");
    t.check("balance_resolution_g > 0", [], "coupons_resolution_check");
    t.check(
      `(shape = 'strip' and length_mm > 0 and width_mm > 0 and thickness_mm > 0)
       or (shape = 'disc' and diameter_mm > 0 and thickness_mm > 0)
       or (shape = 'rod' and diameter_mm > 0 and length_mm > 0 and exposed_ends between 0 and 2)
       or (shape = 'flush-disc' and diameter_mm > 0)`,
      [],
      "coupons_dimensions_check",
    );
    t.check("hole_diameter_mm >= 0", [], "coupons_hole_check");
  });

  await knex.schema.createTable("coupon_exposures", (t) => {
    t.uuid("id").primary({ constraintName: "coupon_exposures_pkey" }).defaultTo(knex.raw("gen_random_uuid()"));
    t.uuid("owner_id")
      .notNullable()
      .references("id")
      .inTable("organisations")
      .onDelete("RESTRICT")
      .withKeyName("coupon_exposures_owner_fkey");
    t.uuid("point_id")
      .notNullable()
      .references("id")
      .inTable("monitoring_points")
      .onDelete("RESTRICT")
      .withKeyName("coupon_exposures_point_fkey");
    t.uuid("coupon_id")
      .notNullable()
      .references("id")
      .inTable("coupons")
      .onDelete("RESTRICT")
      .withKeyName("coupon_exposures_coupon_fkey");
    t.timestamp("installed_at", { useTz: true }).notNullable();
    t.uuid("installed_by")
      .references("id")
      .inTable("users")
      .onDelete("RESTRICT")
      .withKeyName("coupon_exposures_installed_by_fkey");
    t.uuid("installed_by_organisation_id")
      .references("id")
      .inTable("organisations")
      .onDelete("RESTRICT")
      .withKeyName("coupon_exposures_installed_org_fkey");
    t.timestamp("removed_at", { useTz: true });
    t.uuid("removed_by")
      .references("id")
      .inTable("users")
      .onDelete("RESTRICT")
      .withKeyName("coupon_exposures_removed_by_fkey");
    t.uuid("removed_by_organisation_id")
      .references("id")
      .inTable("organisations")
      .onDelete("RESTRICT")
      .withKeyName("coupon_exposures_removed_org_fkey");
    t.text("deposits").notNullable().defaultTo("").comment("as-removed observation, e.g. black iron sulphide film");
    t.boolean("pitting_visible");
    t.text("damage").notNullable().defaultTo("");
    t.text("notes").notNullable().defaultTo("");
    t.timestamps(true, true);
    t.unique(["coupon_id"], { indexName: "coupon_exposures_coupon_key" }); // a coupon is exposed once
    t.check("removed_at is null or removed_at > installed_at", [], "coupon_exposures_dates_check");
  });
  // No two exposures overlap at one point; an open exposure runs to infinity.
  await knex.raw(`
    alter table coupon_exposures add constraint coupon_exposures_no_overlap
      exclude using gist (point_id with =, tstzrange(installed_at, removed_at, '[)') with &&)
  `);

  await knex.raw("create sequence submission_number_seq");
  await knex.schema.createTable("submissions", (t) => {
    t.uuid("id").primary({ constraintName: "submissions_pkey" }).defaultTo(knex.raw("gen_random_uuid()"));
    t.uuid("owner_id")
      .notNullable()
      .references("id")
      .inTable("organisations")
      .onDelete("RESTRICT")
      .withKeyName("submissions_owner_fkey");
    t.uuid("site_id")
      .notNullable()
      .references("id")
      .inTable("sites")
      .onDelete("RESTRICT")
      .withKeyName("submissions_site_fkey");
    t.uuid("contractor_id")
      .notNullable()
      .references("id")
      .inTable("organisations")
      .onDelete("RESTRICT")
      .withKeyName("submissions_contractor_fkey");
    t.text("kind").notNullable();
    t.text("status").notNullable().defaultTo("draft");
    t.integer("revision").notNullable().defaultTo(1);
    t.integer("version").notNullable().defaultTo(1).comment("optimistic concurrency: bumped by every change");
    t.text("reference").notNullable().comment("human-readable packet number, unique per owner");
    t.uuid("created_by")
      .references("id")
      .inTable("users")
      .onDelete("RESTRICT")
      .withKeyName("submissions_created_by_fkey");
    t.timestamp("submitted_at", { useTz: true });
    t.uuid("submitted_by")
      .references("id")
      .inTable("users")
      .onDelete("RESTRICT")
      .withKeyName("submissions_submitted_by_fkey");
    t.timestamp("decided_at", { useTz: true });
    t.uuid("decided_by")
      .references("id")
      .inTable("users")
      .onDelete("RESTRICT")
      .withKeyName("submissions_decided_by_fkey");
    t.text("decision_comment");
    t.text("worst_severity").comment("the worse of general and pitting severity over the packet's results");
    t.integer("flag_count").notNullable().defaultTo(0);
    t.timestamps(true, true);
    t.unique(["owner_id", "reference"], { indexName: "submissions_owner_reference_key" });
    t.check("kind in ('coupon')", [], "submissions_kind_check");
    t.check("status in ('draft', 'submitted', 'returned', 'approved', 'superseded')", [], "submissions_status_check");
    t.check(
      "worst_severity is null or worst_severity in ('low', 'moderate', 'high', 'severe')",
      [],
      "submissions_severity_check",
    );
    t.check("revision >= 1 and version >= 1", [], "submissions_revision_check");
  });
  await knex.raw("create index submissions_owner_status_idx on submissions (owner_id, status, submitted_at)");
  await knex.raw("create index submissions_contractor_idx on submissions (contractor_id, site_id)");

  await knex.schema.createTable("coupon_results", (t) => {
    t.uuid("id").primary({ constraintName: "coupon_results_pkey" }).defaultTo(knex.raw("gen_random_uuid()"));
    t.uuid("submission_id")
      .notNullable()
      .references("id")
      .inTable("submissions")
      .onDelete("CASCADE")
      .withKeyName("coupon_results_submission_fkey");
    t.uuid("exposure_id")
      .notNullable()
      .references("id")
      .inTable("coupon_exposures")
      .onDelete("RESTRICT")
      .withKeyName("coupon_results_exposure_fkey");
    t.text("cleaning_method").notNullable().defaultTo("").comment("e.g. ASTM G1 C.3.5 inhibited HCl");
    t.specificType("coupon_masses_g", "numeric[]")
      .notNullable()
      .defaultTo("{}")
      .comment("coupon mass after each cleaning cycle, cumulative, g");
    t.decimal("blank_initial_mass_g", 12, 4);
    t.specificType("blank_masses_g", "numeric[]")
      .notNullable()
      .defaultTo("{}")
      .comment("blank (control) coupon mass after each cleaning cycle, g");
    t.integer("base_metal_from_cycle").comment(
      "first cycle on the straight base-metal segment (cleaning-curve method)",
    );
    t.decimal("final_mass_g", 12, 4).comment("used when no cycles are recorded");
    t.specificType("pit_depths_mm", "numeric[]").notNullable().defaultTo("{}");
    t.text("lab_notes").notNullable().defaultTo("");
    t.jsonb("inputs").notNullable().comment("every input the calculation used, as sent to the calculation library");
    t.jsonb("computed")
      .notNullable()
      .comment("the calculation library's results and calculation basis; never recomputed silently");
    t.jsonb("flags").notNullable().defaultTo("[]");
    t.text("general_severity");
    t.text("pitting_severity");
    t.timestamps(true, true);
    t.unique(["submission_id", "exposure_id"], { indexName: "coupon_results_submission_exposure_key" });
    t.check("cardinality(coupon_masses_g) > 0 or final_mass_g is not null", [], "coupon_results_mass_check");
    t.check("final_mass_g is null or final_mass_g > 0", [], "coupon_results_final_mass_check");
  });

  await knex.schema.createTable("owner_settings", (t) => {
    t.uuid("owner_id")
      .primary({ constraintName: "owner_settings_pkey" })
      .references("id")
      .inTable("organisations")
      .onDelete("CASCADE")
      .withKeyName("owner_settings_owner_fkey");
    t.decimal("general_moderate_mm_y", 8, 4).comment("null = NACE SP0775 default bands");
    t.decimal("general_high_mm_y", 8, 4);
    t.decimal("general_severe_mm_y", 8, 4);
    t.decimal("pitting_moderate_mm_y", 8, 4);
    t.decimal("pitting_high_mm_y", 8, 4);
    t.decimal("pitting_severe_mm_y", 8, 4);
    t.integer("minimum_exposure_days").notNullable().defaultTo(30);
    t.timestamps(true, true);
    t.check(
      "(general_moderate_mm_y is null and general_high_mm_y is null and general_severe_mm_y is null) or (0 < general_moderate_mm_y and general_moderate_mm_y < general_high_mm_y and general_high_mm_y <= general_severe_mm_y)",
      [],
      "owner_settings_general_check",
    );
    t.check(
      "(pitting_moderate_mm_y is null and pitting_high_mm_y is null and pitting_severe_mm_y is null) or (0 < pitting_moderate_mm_y and pitting_moderate_mm_y < pitting_high_mm_y and pitting_high_mm_y <= pitting_severe_mm_y)",
      [],
      "owner_settings_pitting_check",
    );
    t.check("minimum_exposure_days between 1 and 365", [], "owner_settings_exposure_check");
  });
}

export async function down(knex: Knex): Promise<void> {
  await knex.raw("drop sequence if exists submission_number_seq");
  for (const table of [
    "owner_settings",
    "coupon_results",
    "submissions",
    "coupon_exposures",
    "coupons",
    "monitoring_points",
    "circuits",
    "process_units",
  ]) {
    await knex.schema.dropTableIfExists(table);
  }
}
