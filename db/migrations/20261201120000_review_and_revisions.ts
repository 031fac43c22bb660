import type { Knex } from "knex";

/**
 * The owner's review: revisions of a packet, corrections of approved packets, and the
 * database's guarantee that approved results do not change.
 *
 * - A returned packet is edited and resubmitted on the same row with revision + 1; each
 *   submitted revision's content is kept in submission_revisions, so reviewers can see
 *   what changed.
 * - A correction of an approved packet is a new submission row with the same reference,
 *   the next revision and `supersedes_id`; when it is approved, the old row becomes
 *   "superseded" (with the correction's reason) and stays readable.
 * - Approved and superseded packets, and their results, refuse every other change.
 */
export async function up(knex: Knex): Promise<void> {
  await knex.raw("alter table submissions drop constraint submissions_owner_reference_key");
  await knex.schema.alterTable("submissions", (t) => {
    t.uuid("supersedes_id")
      .references("id")
      .inTable("submissions")
      .onDelete("RESTRICT")
      .withKeyName("submissions_supersedes_fkey")
      .comment("the approved packet this correction replaces once approved");
    t.text("correction_reason").comment("why an approved packet was reopened; required for a correction");
    t.uuid("correction_opened_by")
      .references("id")
      .inTable("users")
      .onDelete("RESTRICT")
      .withKeyName("submissions_correction_opened_by_fkey");
    t.timestamp("superseded_at", { useTz: true });
    t.unique(["owner_id", "reference", "revision"], { indexName: "submissions_owner_reference_revision_key" });
    t.check("supersedes_id is null or correction_reason is not null", [], "submissions_correction_reason_check");
  });
  // At most one open correction per approved packet.
  await knex.raw(
    "create unique index submissions_one_open_correction on submissions (supersedes_id) where supersedes_id is not null and status not in ('approved', 'superseded')",
  );

  await knex.schema.createTable("submission_revisions", (t) => {
    t.uuid("submission_id")
      .notNullable()
      .references("id")
      .inTable("submissions")
      .onDelete("CASCADE")
      .withKeyName("submission_revisions_submission_fkey");
    t.integer("revision").notNullable();
    t.timestamp("submitted_at", { useTz: true }).notNullable();
    t.uuid("submitted_by")
      .references("id")
      .inTable("users")
      .onDelete("RESTRICT")
      .withKeyName("submission_revisions_submitted_by_fkey");
    t.jsonb("results").notNullable().comment("each result's inputs and computed values as submitted in this revision");
    t.text("decision").comment("returned or approved, once decided");
    t.text("decision_comment");
    t.uuid("decided_by")
      .references("id")
      .inTable("users")
      .onDelete("RESTRICT")
      .withKeyName("submission_revisions_decided_by_fkey");
    t.timestamp("decided_at", { useTz: true });
    t.primary(["submission_id", "revision"], { constraintName: "submission_revisions_pkey" });
    t.check("decision is null or decision in ('returned', 'approved')", [], "submission_revisions_decision_check");
  });

  await knex.raw(`
    create function submissions_guard_decided() returns trigger language plpgsql as $$
    begin
      if tg_op = 'DELETE' then
        if old.status in ('submitted', 'approved', 'superseded') then
          raise exception 'submission % is % and cannot be deleted', old.reference, old.status using errcode = '42501';
        end if;
        return old;
      end if;
      if old.status = 'superseded' then
        raise exception 'submission % is superseded and cannot change', old.reference using errcode = '42501';
      end if;
      if old.status = 'approved' then
        -- the only change an approved packet accepts: being superseded by its approved correction
        if new.status = 'superseded'
           and new.superseded_at is not null
           and (to_jsonb(new) - 'status' - 'superseded_at' - 'updated_at' - 'version') = (to_jsonb(old) - 'status' - 'superseded_at' - 'updated_at' - 'version') then
          return new;
        end if;
        raise exception 'submission % is approved and cannot change; open a correction instead', old.reference using errcode = '42501';
      end if;
      return new;
    end $$;
    create trigger submissions_guard_decided before update or delete on submissions
      for each row execute function submissions_guard_decided();

    create function coupon_results_guard_decided() returns trigger language plpgsql as $$
    declare s text;
    begin
      select status into s from submissions where id = coalesce(new.submission_id, old.submission_id);
      if s in ('submitted', 'approved', 'superseded') then
        raise exception 'results of a % packet cannot change', s using errcode = '42501';
      end if;
      return coalesce(new, old);
    end $$;
    create trigger coupon_results_guard_decided before insert or update or delete on coupon_results
      for each row execute function coupon_results_guard_decided();

    create function submission_revisions_append_only() returns trigger language plpgsql as $$
    begin
      if tg_op = 'DELETE' or old.results is distinct from new.results or old.revision <> new.revision
         or (old.decision is not null) then
        raise exception 'a submitted revision is kept as it was' using errcode = '42501';
      end if;
      return new;
    end $$;
    create trigger submission_revisions_append_only before update or delete on submission_revisions
      for each row execute function submission_revisions_append_only();
  `);
}

export async function down(knex: Knex): Promise<void> {
  await knex.raw("drop trigger if exists coupon_results_guard_decided on coupon_results");
  await knex.raw("drop function if exists coupon_results_guard_decided()");
  await knex.raw("drop trigger if exists submissions_guard_decided on submissions");
  await knex.raw("drop function if exists submissions_guard_decided()");
  await knex.schema.dropTableIfExists("submission_revisions");
  await knex.raw("drop function if exists submission_revisions_append_only()");
  await knex.raw("drop index if exists submissions_one_open_correction");
  await knex.schema.alterTable("submissions", (t) => {
    t.dropChecks(["submissions_correction_reason_check"]);
    t.dropUnique(["owner_id", "reference", "revision"], "submissions_owner_reference_revision_key");
    t.dropColumns("supersedes_id", "correction_reason", "correction_opened_by", "superseded_at");
  });
  await knex.raw("alter table submissions add constraint submissions_owner_reference_key unique (owner_id, reference)");
}
