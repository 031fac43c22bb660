import type { Knex } from "knex";

/**
 * Data at size and under contention:
 * - `audit_checkpoints`: per owner, the last audit event whose chain was verified and its
 *   hash, so a view of the trail re-hashes only the events after it;
 * - `audit_verifications`: each full re-verification of an owner's trail (when, how many
 *   events, the broken ids), shown on the audit page;
 * - at most one open draft per contractor, site and kind (`submissions_one_open_draft`);
 * - `version` on contracts and owner settings: an edit made on a stale page is refused;
 * - `site_today(site)`: the calendar date at a site, in its time zone, by which a contract
 *   is in force there (not the database server's `current_date`).
 */
export async function up(knex: Knex): Promise<void> {
  const duplicates = await knex.raw<{ rows: Array<{ contractor_id: string; site_id: string; n: number }> }>(
    `select contractor_id, site_id, kind, count(*)::int as n from submissions
      where status = 'draft' group by contractor_id, site_id, kind having count(*) > 1`,
  );
  if (duplicates.rows.length)
    throw new Error(
      `Several open drafts for one contractor, site and kind (${duplicates.rows
        .map((d) => `contractor ${d.contractor_id} at site ${d.site_id}: ${d.n}`)
        .join("; ")}): merge their results into one draft before migrating.`,
    );
  await knex.raw(
    "create unique index submissions_one_open_draft on submissions (contractor_id, site_id, kind) where status = 'draft'",
  );

  await knex.schema.createTable("audit_checkpoints", (t) => {
    t.uuid("owner_id")
      .primary({ constraintName: "audit_checkpoints_pkey" })
      .references("id")
      .inTable("organisations")
      .onDelete("RESTRICT")
      .withKeyName("audit_checkpoints_owner_fkey");
    t.bigInteger("event_id").notNullable().comment("the last event of the owner's trail verified so far");
    t.text("hash").notNullable().comment("that event's hash: the next event's prev_hash must equal it");
    t.integer("events").notNullable().comment("events verified up to and including event_id");
    t.timestamp("verified_at", { useTz: true }).notNullable().defaultTo(knex.fn.now());
  });

  await knex.schema.createTable("audit_verifications", (t) => {
    t.bigIncrements("id", { primaryKey: true });
    t.uuid("owner_id")
      .notNullable()
      .references("id")
      .inTable("organisations")
      .onDelete("RESTRICT")
      .withKeyName("audit_verifications_owner_fkey");
    t.timestamp("started_at", { useTz: true }).notNullable();
    t.timestamp("finished_at", { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.integer("events").notNullable();
    t.jsonb("broken").notNullable().comment("[{ id, problem }] of every event that failed; [] when intact");
  });
  await knex.raw("create index audit_verifications_owner_idx on audit_verifications (owner_id, id desc)");

  await knex.schema.alterTable("contracts", (t) => {
    t.integer("version").notNullable().defaultTo(1).comment("optimistic concurrency: bumped by every edit");
  });
  await knex.schema.alterTable("owner_settings", (t) => {
    t.integer("version").notNullable().defaultTo(1).comment("optimistic concurrency: bumped by every save");
  });
  await knex.raw(`
    create function site_today(site uuid, instant timestamptz default now()) returns date language sql stable as $$
      select (instant at time zone s.time_zone)::date from sites s where s.id = site
    $$`);
}

export async function down(knex: Knex): Promise<void> {
  await knex.raw("drop function if exists site_today(uuid, timestamptz)");
  await knex.schema.alterTable("owner_settings", (t) => t.dropColumn("version"));
  await knex.schema.alterTable("contracts", (t) => t.dropColumn("version"));
  await knex.schema.dropTableIfExists("audit_verifications");
  await knex.schema.dropTableIfExists("audit_checkpoints");
  await knex.raw("drop index if exists submissions_one_open_draft");
}
