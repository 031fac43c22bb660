import type { Knex } from "knex";

/**
 * The engineer's decision and the rework loop, kept with each revision:
 * - `acknowledgements`: each warning-level flag the engineer acknowledged on approval, with
 *   the reason given (note-level flags need none);
 * - `reply`: the contractor's answer to the previous return, sent with this revision;
 * - `attachments`: the photos and lab sheets held when the revision was submitted, so the
 *   change between revisions names files added or removed.
 * The owner's settings gain `photos_required`: a coupon without a photo raises a warning.
 */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.alterTable("submission_revisions", (t) => {
    t.jsonb("acknowledgements").comment(
      "warnings acknowledged on approval: [{ resultId, coupon, code, message, reason }]",
    );
    t.text("reply").comment("the contractor's reply to the previous return, sent with this revision");
    t.jsonb("attachments").comment(
      "attachments when submitted: [{ id, exposureId, kind, name, sha256 }]; null before 2026-12-04",
    );
    t.check("reply is null or length(reply) between 1 and 4000", [], "submission_revisions_reply_check");
  });
  await knex.schema.alterTable("owner_settings", (t) => {
    t.boolean("photos_required")
      .notNullable()
      .defaultTo(false)
      .comment("a coupon submitted without a photo raises a warning the engineer must acknowledge");
  });
  // The reply and the attachment list are written once, with the revision.
  await knex.raw(`
    create or replace function submission_revisions_append_only() returns trigger language plpgsql as $$
    begin
      if tg_op = 'DELETE' or old.results is distinct from new.results or old.revision <> new.revision
         or old.reply is distinct from new.reply or old.attachments is distinct from new.attachments
         or (old.decision is not null) then
        raise exception 'a submitted revision is kept as it was' using errcode = '42501';
      end if;
      return new;
    end $$;
  `);
}

export async function down(knex: Knex): Promise<void> {
  await knex.raw(`
    create or replace function submission_revisions_append_only() returns trigger language plpgsql as $$
    begin
      if tg_op = 'DELETE' or old.results is distinct from new.results or old.revision <> new.revision
         or (old.decision is not null) then
        raise exception 'a submitted revision is kept as it was' using errcode = '42501';
      end if;
      return new;
    end $$;
  `);
  await knex.schema.alterTable("owner_settings", (t) => {
    t.dropColumn("photos_required");
  });
  await knex.schema.alterTable("submission_revisions", (t) => {
    t.dropChecks(["submission_revisions_reply_check"]);
    t.dropColumns("acknowledgements", "reply", "attachments");
  });
}
