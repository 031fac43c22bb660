import type { Knex } from "knex";

// Tenancy roots: every owner's data hangs off an organisation of kind "owner";
// contractors are organisations of kind "contractor" that owners engage by contract.
export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable("organisations", (t) => {
    t.uuid("id").primary({ constraintName: "organisations_pkey" }).defaultTo(knex.raw("gen_random_uuid()"));
    t.text("name").notNullable();
    t.text("kind").notNullable().comment("owner: an asset owner (tenant); contractor: a company the owner engages");
    t.timestamps(true, true);
    t.check("kind in ('owner', 'contractor')", [], "organisations_kind_check");
    t.check("length(trim(name)) > 0", [], "organisations_name_check");
  });

  await knex.schema.createTable("sites", (t) => {
    t.uuid("id").primary({ constraintName: "sites_pkey" }).defaultTo(knex.raw("gen_random_uuid()"));
    t.uuid("owner_id")
      .notNullable()
      .references("id")
      .inTable("organisations")
      .onDelete("RESTRICT")
      .withKeyName("sites_owner_fkey");
    t.text("name").notNullable();
    t.text("code").notNullable().comment("short plant code, unique per owner, used in tags and reports");
    t.text("time_zone").notNullable().comment("IANA time zone name; dates on screens and reports are shown in it");
    t.timestamps(true, true);
    t.unique(["owner_id", "code"], { indexName: "sites_owner_code_key" });
    t.check("length(trim(name)) > 0", [], "sites_name_check");
    t.check("code ~ '^[A-Z0-9][A-Z0-9_-]{0,15}$'", [], "sites_code_check");
  });

  // Only owners can own sites: enforced by a trigger because a CHECK cannot look at another row.
  await knex.raw(`
    create function sites_owner_is_owner() returns trigger language plpgsql as $$
    begin
      if not exists (select 1 from organisations o where o.id = new.owner_id and o.kind = 'owner') then
        raise exception 'sites.owner_id must reference an organisation of kind owner' using errcode = '23514';
      end if;
      return new;
    end $$;
    create trigger sites_owner_is_owner before insert or update of owner_id on sites
      for each row execute function sites_owner_is_owner();
  `);
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.dropTable("sites");
  await knex.raw("drop function if exists sites_owner_is_owner()");
  await knex.schema.dropTable("organisations");
}
