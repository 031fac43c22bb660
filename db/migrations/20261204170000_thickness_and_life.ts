import type { Knex } from "knex";

/**
 * Thickness surveys and remaining life.
 *
 * - `cmls`: condition monitoring locations of a circuit (tag unique per owner), with a
 *   base-line thickness and date; `cml_replacements` records a replaced component: a new
 *   base-line from its date, and no rate spans it.
 * - Submissions of a second kind, `thickness` (a thickness survey): `survey_circuits` says
 *   which circuits of the submission's site it covers, `thickness_readings` holds one
 *   reading per CML (the minimum of its quadrant readings, which are kept). The readings
 *   of a submitted, approved or superseded survey refuse every change, as coupon results do.
 * - Attachments may belong to a survey (a submission) instead of a coupon pull: the survey
 *   sheet (PDF), photos, and the instrument's CSV export (text, its own size cap).
 * - Owner settings gain the rate policy.
 * - `circuit_life` / `cml_life`: derived summaries, versioned (a new version per
 *   computation, earlier ones kept); `life_recompute_runs` tracks each queued recompute.
 */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable("cmls", (t) => {
    t.uuid("id").primary({ constraintName: "cmls_pkey" }).defaultTo(knex.raw("gen_random_uuid()"));
    t.uuid("owner_id")
      .notNullable()
      .references("id")
      .inTable("organisations")
      .onDelete("RESTRICT")
      .withKeyName("cmls_owner_fkey");
    t.uuid("circuit_id")
      .notNullable()
      .references("id")
      .inTable("circuits")
      .onDelete("RESTRICT")
      .withKeyName("cmls_circuit_fkey");
    t.text("tag").notNullable().comment("unique per owner");
    t.text("location").notNullable().defaultTo("").comment("where on the circuit, in words");
    t.text("component").notNullable().comment("pipe, elbow, tee, reducer, cap, nozzle, flange, valve, other");
    t.boolean("injection_point").notNullable().defaultTo(false).comment("injection-point CML: its own interval cap");
    t.decimal("baseline_thickness_mm", 8, 3).comment("base-line wall, mm; null = nominal less mill tolerance");
    t.date("baseline_on").comment("date of the base-line; null = the first reading");
    t.timestamp("retired_at", { useTz: true }).comment("no longer surveyed; its history stays");
    t.timestamps(true, true);
    t.unique(["owner_id", "tag"], { indexName: "cmls_owner_tag_key" });
    t.check(
      "component in ('pipe', 'elbow', 'tee', 'reducer', 'cap', 'nozzle', 'flange', 'valve', 'other')",
      [],
      "cmls_component_check",
    );
    t.check("baseline_thickness_mm is null or baseline_thickness_mm > 0", [], "cmls_baseline_check");
    t.check("length(tag) between 1 and 40", [], "cmls_tag_check");
  });
  await knex.raw("create index cmls_circuit_idx on cmls (circuit_id)");

  await knex.schema.createTable("cml_replacements", (t) => {
    t.uuid("id").primary({ constraintName: "cml_replacements_pkey" }).defaultTo(knex.raw("gen_random_uuid()"));
    t.uuid("cml_id")
      .notNullable()
      .references("id")
      .inTable("cmls")
      .onDelete("RESTRICT")
      .withKeyName("cml_replacements_cml_fkey");
    t.date("replaced_on").notNullable().comment("readings before this date belong to the old component");
    t.decimal("baseline_thickness_mm", 8, 3).comment(
      "the new component's wall, mm; null = nominal less mill tolerance",
    );
    t.text("reason").notNullable();
    t.uuid("recorded_by")
      .references("id")
      .inTable("users")
      .onDelete("RESTRICT")
      .withKeyName("cml_replacements_recorded_by_fkey");
    t.timestamp("created_at", { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.unique(["cml_id", "replaced_on"], { indexName: "cml_replacements_cml_day_key" });
    t.check("length(reason) >= 3", [], "cml_replacements_reason_check");
    t.check("baseline_thickness_mm is null or baseline_thickness_mm > 0", [], "cml_replacements_baseline_check");
  });

  await knex.raw("alter table submissions drop constraint submissions_kind_check");
  await knex.raw(
    "alter table submissions add constraint submissions_kind_check check (kind in ('coupon', 'thickness'))",
  );
  await knex.raw(
    "comment on column submissions.kind is 'coupon: lab results of pulled coupons; thickness: a thickness survey'",
  );

  await knex.schema.createTable("survey_circuits", (t) => {
    t.uuid("submission_id")
      .notNullable()
      .references("id")
      .inTable("submissions")
      .onDelete("CASCADE")
      .withKeyName("survey_circuits_submission_fkey");
    t.uuid("circuit_id")
      .notNullable()
      .references("id")
      .inTable("circuits")
      .onDelete("RESTRICT")
      .withKeyName("survey_circuits_circuit_fkey");
    t.primary(["submission_id", "circuit_id"], { constraintName: "survey_circuits_pkey" });
  });
  await knex.raw("create index survey_circuits_circuit_idx on survey_circuits (circuit_id)");

  await knex.schema.createTable("thickness_readings", (t) => {
    t.uuid("id").primary({ constraintName: "thickness_readings_pkey" }).defaultTo(knex.raw("gen_random_uuid()"));
    t.uuid("submission_id")
      .notNullable()
      .references("id")
      .inTable("submissions")
      .onDelete("CASCADE")
      .withKeyName("thickness_readings_submission_fkey");
    t.uuid("cml_id")
      .notNullable()
      .references("id")
      .inTable("cmls")
      .onDelete("RESTRICT")
      .withKeyName("thickness_readings_cml_fkey");
    t.date("measured_on").notNullable().comment("the site's calendar day of the reading");
    t.decimal("thickness_mm", 8, 3)
      .notNullable()
      .comment("the minimum of the quadrant readings when several are taken");
    t.specificType("quadrant_readings_mm", "numeric[]")
      .notNullable()
      .defaultTo("{}")
      .comment("every reading taken at the CML, mm (e.g. 12, 3, 6 and 9 o'clock)");
    t.text("method").notNullable().defaultTo("UT").comment("UT, UT-scan, RT, EMAT, other");
    t.text("instrument").notNullable().defaultTo("").comment("gauge make, model or serial");
    t.decimal("instrument_resolution_mm", 6, 3).comment("the gauge's display resolution, mm");
    t.text("technician").notNullable().defaultTo("").comment("who took the reading");
    t.text("notes").notNullable().defaultTo("");
    t.jsonb("flags").notNullable().defaultTo("[]").comment("quality flags when submitted, with their words");
    t.timestamps(true, true);
    t.unique(["submission_id", "cml_id"], { indexName: "thickness_readings_submission_cml_key" });
    t.check("thickness_mm > 0", [], "thickness_readings_thickness_check");
    t.check("method in ('UT', 'UT-scan', 'RT', 'EMAT', 'other')", [], "thickness_readings_method_check");
    t.check(
      "instrument_resolution_mm is null or instrument_resolution_mm > 0",
      [],
      "thickness_readings_resolution_check",
    );
  });
  await knex.raw("create index thickness_readings_cml_idx on thickness_readings (cml_id, measured_on)");
  await knex.raw(`
    create function thickness_readings_guard_decided() returns trigger language plpgsql as $$
    declare s text;
    begin
      select status into s from submissions where id = coalesce(new.submission_id, old.submission_id);
      if s in ('submitted', 'approved', 'superseded') then
        raise exception 'readings of a % survey cannot change', s using errcode = '42501';
      end if;
      return coalesce(new, old);
    end $$;
    create trigger thickness_readings_guard_decided before insert or update or delete on thickness_readings
      for each row execute function thickness_readings_guard_decided();
  `);

  // Attachments: a coupon pull or a survey (a submission) as parent, exactly one.
  await knex.raw(`
    alter table attachments drop constraint attachments_kind_check;
    alter table attachments drop constraint attachments_content_type_check;
    alter table attachments drop constraint attachments_pdf_is_lab_sheet_check;
    alter table attachments drop constraint attachments_byte_size_check;
    alter table attachments drop constraint attachments_object_key_check;
    alter table attachments drop constraint attachments_thumbnail_key_check;
    alter table attachments alter column exposure_id drop not null;
    alter table attachments add column submission_id uuid
      constraint attachments_submission_fkey references submissions(id) on delete restrict;
    comment on column attachments.submission_id is 'the thickness survey this file belongs to (null for a coupon pull''s files)';
    alter table attachments add constraint attachments_parent_check
      check ((exposure_id is null) <> (submission_id is null));
    alter table attachments add constraint attachments_kind_check check (
      (exposure_id is not null and kind in ('as_removed', 'after_cleaning', 'pit_close_up', 'lab_sheet'))
      or (submission_id is not null and kind in ('survey_sheet', 'survey_photo', 'instrument_export')));
    comment on column attachments.kind is 'as_removed / after_cleaning / pit_close_up: photos of the coupon; lab_sheet: the lab''s record; survey_sheet, survey_photo, instrument_export: a thickness survey''s files';
    alter table attachments add constraint attachments_content_type_check
      check (content_type in ('image/jpeg', 'image/png', 'image/webp', 'application/pdf', 'text/csv'));
    alter table attachments add constraint attachments_pdf_is_a_sheet_check
      check (content_type <> 'application/pdf' or kind in ('lab_sheet', 'survey_sheet'));
    alter table attachments add constraint attachments_csv_is_an_export_check
      check ((content_type = 'text/csv') = (kind = 'instrument_export'));
    alter table attachments add constraint attachments_byte_size_check
      check (byte_size > 0 and byte_size <= case when content_type = 'text/csv' then 5242880 else 20971520 end);
    alter table attachments add constraint attachments_object_key_check check (
      object_key = 'owners/' || owner_id || case when exposure_id is not null
        then '/exposures/' || exposure_id else '/submissions/' || submission_id end || '/' || id || '/original');
    alter table attachments add constraint attachments_thumbnail_key_check check (
      (content_type in ('application/pdf', 'text/csv') and thumbnail_key is null) or
      (content_type not in ('application/pdf', 'text/csv') and thumbnail_key = 'owners/' || owner_id || case when exposure_id is not null
        then '/exposures/' || exposure_id else '/submissions/' || submission_id end || '/' || id || '/thumb.jpg'));
    create index attachments_submission_idx on attachments (submission_id, created_at) where state = 'stored';
  `);

  await knex.schema.alterTable("owner_settings", (t) => {
    t.text("rate_policy")
      .notNullable()
      .defaultTo("greater_of_long_short")
      .comment("greater_of_long_short (API 570) or regression_upper (the regression's upper confidence bound)");
    t.decimal("minimum_rate_mm_y", 8, 4).comment(
      "stated minimum rate for CMLs whose wall shows no loss or grew, mm/y; null = no loss gives no finite life",
    );
    t.decimal("coupon_window_years", 5, 2)
      .notNullable()
      .defaultTo(2)
      .comment("approved coupon rates of the last this many years feed a circuit's coupon rates");
    t.text("coupon_rate_basis")
      .notNullable()
      .defaultTo("general")
      .comment("general or pitting: the coupon rate a circuit without usable thickness history is estimated from");
    t.decimal("rate_disagreement_factor", 6, 2)
      .notNullable()
      .defaultTo(2)
      .comment("coupon and thickness rates differing by more than this factor are flagged");
    t.decimal("max_interval_years", 5, 2).comment(
      "the owner's maximum thickness-inspection interval, years; it only ever tightens the class maximum",
    );
    t.check("rate_policy in ('greater_of_long_short', 'regression_upper')", [], "owner_settings_rate_policy_check");
    t.check("minimum_rate_mm_y is null or minimum_rate_mm_y > 0", [], "owner_settings_minimum_rate_check");
    t.check("coupon_window_years > 0 and coupon_window_years <= 20", [], "owner_settings_coupon_window_check");
    t.check("coupon_rate_basis in ('general', 'pitting')", [], "owner_settings_coupon_rate_basis_check");
    t.check("rate_disagreement_factor > 1", [], "owner_settings_disagreement_factor_check");
    t.check(
      "max_interval_years is null or (max_interval_years > 0 and max_interval_years <= 20)",
      [],
      "owner_settings_max_interval_check",
    );
  });

  await knex.schema.createTable("life_recompute_runs", (t) => {
    t.uuid("id").primary({ constraintName: "life_recompute_runs_pkey" }).defaultTo(knex.raw("gen_random_uuid()"));
    t.uuid("owner_id")
      .notNullable()
      .references("id")
      .inTable("organisations")
      .onDelete("RESTRICT")
      .withKeyName("life_recompute_runs_owner_fkey");
    t.uuid("requested_by")
      .references("id")
      .inTable("users")
      .onDelete("RESTRICT")
      .withKeyName("life_recompute_runs_requested_by_fkey")
      .comment("null when the command or a change queued it");
    t.text("trigger").notNullable().comment("button, command, policy, design, thresholds");
    t.text("reason").notNullable();
    t.text("state").notNullable().defaultTo("queued");
    t.integer("circuits_total");
    t.integer("circuits_done").notNullable().defaultTo(0);
    t.timestamp("created_at", { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.timestamp("started_at", { useTz: true });
    t.timestamp("finished_at", { useTz: true });
    t.text("error");
    t.check(
      "trigger in ('button', 'command', 'policy', 'design', 'thresholds')",
      [],
      "life_recompute_runs_trigger_check",
    );
    t.check("state in ('queued', 'running', 'done', 'failed')", [], "life_recompute_runs_state_check");
  });
  await knex.raw("create index life_recompute_runs_owner_idx on life_recompute_runs (owner_id, created_at desc)");

  await knex.schema.createTable("circuit_life", (t) => {
    t.uuid("id").primary({ constraintName: "circuit_life_pkey" }).defaultTo(knex.raw("gen_random_uuid()"));
    t.uuid("owner_id")
      .notNullable()
      .references("id")
      .inTable("organisations")
      .onDelete("RESTRICT")
      .withKeyName("circuit_life_owner_fkey");
    t.uuid("circuit_id")
      .notNullable()
      .references("id")
      .inTable("circuits")
      .onDelete("RESTRICT")
      .withKeyName("circuit_life_circuit_fkey");
    t.integer("version").notNullable().comment("1, 2, … per circuit; earlier versions are kept");
    t.boolean("current").notNullable().defaultTo(true);
    t.timestamp("computed_at", { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.text("cause").notNullable().comment("approval, recompute, design, policy, thresholds");
    t.uuid("cause_submission_id")
      .references("id")
      .inTable("submissions")
      .onDelete("RESTRICT")
      .withKeyName("circuit_life_cause_submission_fkey");
    t.uuid("cause_run_id")
      .references("id")
      .inTable("life_recompute_runs")
      .onDelete("RESTRICT")
      .withKeyName("circuit_life_cause_run_fkey");
    t.text("formula_version").notNullable();
    t.text("condition")
      .notNullable()
      .comment("assessed (a life), below_required, no_loss (no measurable loss), no_data (nothing to compute from)");
    t.decimal("required_thickness_mm", 8, 3);
    t.text("required_governed_by").comment("pressure or structural");
    t.uuid("governing_cml_id")
      .references("id")
      .inTable("cmls")
      .onDelete("RESTRICT")
      .withKeyName("circuit_life_governing_cml_fkey");
    t.double("governing_rate_mm_y");
    t.text("rate_source").comment("thickness, coupon-general or coupon-pitting");
    t.double("remaining_life_years").comment("point estimate; null with life_note when none can be given");
    t.double("remaining_life_conservative_years");
    t.text("life_note").comment("why remaining life is null, in words");
    t.date("as_of").comment("the last reading the life is measured from");
    t.date("projected_required_on").comment("the day the wall reaches required thickness at the governing rate");
    t.date("next_inspection_on");
    t.text("next_inspection_governed_by").comment("half-life, class-maximum, injection-point, owner-maximum");
    t.jsonb("coupon_rates").notNullable().defaultTo("{}");
    t.jsonb("flags").notNullable().defaultTo("[]");
    t.jsonb("basis").notNullable().comment("formula version, inputs, policy: everything the figures came from");
    t.unique(["circuit_id", "version"], { indexName: "circuit_life_circuit_version_key" });
    t.check("condition in ('assessed', 'below_required', 'no_loss', 'no_data')", [], "circuit_life_condition_check");
    t.check("cause in ('approval', 'recompute', 'design', 'policy', 'thresholds')", [], "circuit_life_cause_check");
  });
  await knex.raw("create unique index circuit_life_one_current on circuit_life (circuit_id) where current");
  await knex.raw(
    "create index circuit_life_owner_current_idx on circuit_life (owner_id, remaining_life_years) where current",
  );

  await knex.schema.createTable("cml_life", (t) => {
    t.uuid("circuit_life_id")
      .notNullable()
      .references("id")
      .inTable("circuit_life")
      .onDelete("CASCADE")
      .withKeyName("cml_life_circuit_life_fkey");
    t.uuid("cml_id")
      .notNullable()
      .references("id")
      .inTable("cmls")
      .onDelete("RESTRICT")
      .withKeyName("cml_life_cml_fkey");
    t.text("condition").notNullable();
    t.integer("readings_used").notNullable();
    t.date("last_measured_on");
    t.decimal("last_thickness_mm", 8, 3);
    t.double("long_term_mm_y");
    t.double("short_term_mm_y");
    t.double("regression_mm_y");
    t.double("regression_upper_mm_y");
    t.double("governing_rate_mm_y");
    t.double("remaining_life_years");
    t.double("remaining_life_conservative_years");
    t.text("life_note");
    t.date("projected_required_on");
    t.date("next_inspection_on");
    t.text("next_inspection_governed_by");
    t.jsonb("flags").notNullable().defaultTo("[]");
    t.jsonb("basis").notNullable();
    t.primary(["circuit_life_id", "cml_id"], { constraintName: "cml_life_pkey" });
    t.check("condition in ('assessed', 'below_required', 'no_loss', 'no_data')", [], "cml_life_condition_check");
  });
  await knex.raw("create index cml_life_cml_idx on cml_life (cml_id)");
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.dropTableIfExists("cml_life");
  await knex.schema.dropTableIfExists("circuit_life");
  await knex.schema.dropTableIfExists("life_recompute_runs");
  await knex.schema.alterTable("owner_settings", (t) => {
    t.dropChecks([
      "owner_settings_rate_policy_check",
      "owner_settings_minimum_rate_check",
      "owner_settings_coupon_window_check",
      "owner_settings_coupon_rate_basis_check",
      "owner_settings_disagreement_factor_check",
      "owner_settings_max_interval_check",
    ]);
    t.dropColumns(
      "rate_policy",
      "minimum_rate_mm_y",
      "coupon_window_years",
      "coupon_rate_basis",
      "rate_disagreement_factor",
      "max_interval_years",
    );
  });
  await knex.raw(`
    delete from attachments where submission_id is not null;
    drop index if exists attachments_submission_idx;
    alter table attachments drop constraint attachments_parent_check;
    alter table attachments drop constraint attachments_kind_check;
    alter table attachments drop constraint attachments_content_type_check;
    alter table attachments drop constraint attachments_pdf_is_a_sheet_check;
    alter table attachments drop constraint attachments_csv_is_an_export_check;
    alter table attachments drop constraint attachments_byte_size_check;
    alter table attachments drop constraint attachments_object_key_check;
    alter table attachments drop constraint attachments_thumbnail_key_check;
    alter table attachments drop column submission_id;
    alter table attachments alter column exposure_id set not null;
    alter table attachments add constraint attachments_kind_check
      check (kind in ('as_removed', 'after_cleaning', 'pit_close_up', 'lab_sheet'));
    alter table attachments add constraint attachments_content_type_check
      check (content_type in ('image/jpeg', 'image/png', 'image/webp', 'application/pdf'));
    alter table attachments add constraint attachments_pdf_is_lab_sheet_check
      check (content_type <> 'application/pdf' or kind = 'lab_sheet');
    alter table attachments add constraint attachments_byte_size_check check (byte_size > 0 and byte_size <= 20971520);
    alter table attachments add constraint attachments_object_key_check
      check (object_key = 'owners/' || owner_id || '/exposures/' || exposure_id || '/' || id || '/original');
    alter table attachments add constraint attachments_thumbnail_key_check check (
      (content_type = 'application/pdf' and thumbnail_key is null) or
      (content_type <> 'application/pdf' and thumbnail_key = 'owners/' || owner_id || '/exposures/' || exposure_id || '/' || id || '/thumb.jpg'));
  `);
  await knex.raw("drop trigger if exists thickness_readings_guard_decided on thickness_readings");
  await knex.raw("drop function if exists thickness_readings_guard_decided()");
  await knex.schema.dropTableIfExists("thickness_readings");
  await knex.schema.dropTableIfExists("survey_circuits");
  await knex.raw("delete from submissions where kind = 'thickness'");
  await knex.raw("alter table submissions drop constraint submissions_kind_check");
  await knex.raw("alter table submissions add constraint submissions_kind_check check (kind in ('coupon'))");
  await knex.schema.dropTableIfExists("cml_replacements");
  await knex.schema.dropTableIfExists("cmls");
}
