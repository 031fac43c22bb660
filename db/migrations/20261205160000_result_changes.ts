import type { Knex } from "knex";

/**
 * The change feed of approved results (`GET /api/v1/results`): one row each time a coupon
 * result or thickness reading becomes approved or superseded, written by a trigger on the
 * submission's status change (so no approval path can forget it). Each row carries the
 * transaction id that wrote it (`xid8`); the feed is read in (xid, seq) order and only up to
 * the oldest transaction still running (`pg_snapshot_xmin`), so a row committed late never
 * lands behind a cursor already handed out.
 */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable("result_changes", (t) => {
    t.bigIncrements("seq", { primaryKey: false });
    t.primary(["seq"], { constraintName: "result_changes_pkey" });
    t.specificType("xid", "xid8")
      .notNullable()
      .defaultTo(knex.raw("pg_current_xact_id()"))
      .comment("the writing transaction: the feed's order and its safety lag");
    t.uuid("owner_id")
      .notNullable()
      .references("id")
      .inTable("organisations")
      .onDelete("RESTRICT")
      .withKeyName("result_changes_owner_fkey");
    t.text("kind").notNullable().comment("coupon: a coupon result; thickness: a thickness reading");
    t.uuid("item_id").notNullable().comment("coupon_results.id or thickness_readings.id");
    t.uuid("submission_id")
      .notNullable()
      .references("id")
      .inTable("submissions")
      .onDelete("RESTRICT")
      .withKeyName("result_changes_submission_fkey");
    t.text("status").notNullable();
    t.uuid("superseded_by_submission_id")
      .references("id")
      .inTable("submissions")
      .onDelete("RESTRICT")
      .withKeyName("result_changes_superseded_by_fkey");
    t.timestamp("changed_at", { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.check("kind in ('coupon', 'thickness')", [], "result_changes_kind_check");
    t.check("status in ('approved', 'superseded')", [], "result_changes_status_check");
  });
  await knex.raw("create index result_changes_owner_order_idx on result_changes (owner_id, xid, seq)");

  await knex.raw(`
    create function result_changes_from_submission() returns trigger language plpgsql as $$
    declare
      replaced_by uuid;
    begin
      if new.status = old.status or new.status not in ('approved', 'superseded') then
        return new;
      end if;
      if new.status = 'superseded' then
        select id into replaced_by from submissions where supersedes_id = new.id order by revision desc limit 1;
      end if;
      if new.kind = 'coupon' then
        insert into result_changes (owner_id, kind, item_id, submission_id, status, superseded_by_submission_id)
        select new.owner_id, 'coupon', r.id, new.id, new.status, replaced_by
          from coupon_results r where r.submission_id = new.id order by r.id;
      else
        insert into result_changes (owner_id, kind, item_id, submission_id, status, superseded_by_submission_id)
        select new.owner_id, 'thickness', t.id, new.id, new.status, replaced_by
          from thickness_readings t where t.submission_id = new.id order by t.id;
      end if;
      return new;
    end $$;
    create trigger submissions_result_changes after update of status on submissions
      for each row execute function result_changes_from_submission();
  `);

  // What was approved or superseded before the feed existed, in the order it was decided.
  await knex.raw(`
    insert into result_changes (owner_id, kind, item_id, submission_id, status, superseded_by_submission_id, changed_at)
    select s.owner_id, x.kind, x.item_id, s.id, 'approved', null, coalesce(s.decided_at, s.updated_at)
      from submissions s
      join lateral (
        select 'coupon' as kind, r.id as item_id from coupon_results r where r.submission_id = s.id
        union all
        select 'thickness', t.id from thickness_readings t where t.submission_id = s.id
      ) x on true
     where s.status in ('approved', 'superseded')
     order by coalesce(s.decided_at, s.updated_at), s.id, x.item_id
  `);
  await knex.raw(`
    insert into result_changes (owner_id, kind, item_id, submission_id, status, superseded_by_submission_id, changed_at)
    select s.owner_id, x.kind, x.item_id, s.id, 'superseded',
           (select c.id from submissions c where c.supersedes_id = s.id order by c.revision desc limit 1),
           coalesce(s.superseded_at, s.updated_at)
      from submissions s
      join lateral (
        select 'coupon' as kind, r.id as item_id from coupon_results r where r.submission_id = s.id
        union all
        select 'thickness', t.id from thickness_readings t where t.submission_id = s.id
      ) x on true
     where s.status = 'superseded'
     order by coalesce(s.superseded_at, s.updated_at), s.id, x.item_id
  `);
}

export async function down(knex: Knex): Promise<void> {
  await knex.raw("drop trigger if exists submissions_result_changes on submissions");
  await knex.raw("drop function if exists result_changes_from_submission()");
  await knex.schema.dropTableIfExists("result_changes");
}
