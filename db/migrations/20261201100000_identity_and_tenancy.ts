import type { Knex } from "knex";

// People, sessions, contracts, API clients and the audit trail.
// Identity comes from the IdP; authorisation (organisation, role, status) lives here.
export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable("users", (t) => {
    t.uuid("id").primary({ constraintName: "users_pkey" }).defaultTo(knex.raw("gen_random_uuid()"));
    t.uuid("organisation_id")
      .notNullable()
      .references("id")
      .inTable("organisations")
      .onDelete("RESTRICT")
      .withKeyName("users_organisation_fkey");
    t.text("email").notNullable().comment("stored lower-case; one organisation and one role per address");
    t.text("name").notNullable().defaultTo("");
    t.text("role").notNullable();
    t.text("status")
      .notNullable()
      .defaultTo("invited")
      .comment("invited until first sign-in, then active; disabled blocks sign-in");
    t.text("units").notNullable().defaultTo("si").comment("display units: si (mm/y, mm, MPa) or us (mpy, in, psi)");
    t.text("idp_subject").comment("the IdP's sub claim, recorded at first sign-in");
    t.uuid("invited_by_organisation_id")
      .references("id")
      .inTable("organisations")
      .onDelete("SET NULL")
      .withKeyName("users_invited_by_organisation_fkey")
      .comment("the owner whose administrator invited this person (contractor technicians)");
    t.uuid("invited_by_user_id")
      .references("id")
      .inTable("users")
      .onDelete("SET NULL")
      .withKeyName("users_invited_by_fkey");
    t.timestamp("last_sign_in_at", { useTz: true });
    t.timestamps(true, true);
    t.check("email = lower(email) and email ~ '^[^@\\s]+@[^@\\s]+\\.[^@\\s]+$'", [], "users_email_check");
    t.check(
      "role in ('administrator', 'integrity_engineer', 'plant_manager', 'contractor_technician')",
      [],
      "users_role_check",
    );
    t.check("status in ('invited', 'active', 'disabled')", [], "users_status_check");
    t.check("units in ('si', 'us')", [], "users_units_check");
  });
  await knex.raw("create unique index users_email_key on users (email)");
  await knex.raw("create index users_organisation_idx on users (organisation_id)");

  // Owner roles belong to owners, the technician role to contractors.
  await knex.raw(`
    create function users_role_matches_organisation() returns trigger language plpgsql as $$
    declare k text;
    begin
      select kind into k from organisations where id = new.organisation_id;
      if (k = 'owner' and new.role = 'contractor_technician') or (k = 'contractor' and new.role <> 'contractor_technician') then
        raise exception 'users.role % does not fit an organisation of kind %', new.role, k using errcode = '23514';
      end if;
      return new;
    end $$;
    create trigger users_role_matches_organisation before insert or update of role, organisation_id on users
      for each row execute function users_role_matches_organisation();
  `);

  await knex.schema.createTable("sessions", (t) => {
    t.text("id_hash")
      .primary({ constraintName: "sessions_pkey" })
      .comment("sha256 of the random id in the cookie; the id itself is never stored");
    t.uuid("user_id")
      .notNullable()
      .references("id")
      .inTable("users")
      .onDelete("CASCADE")
      .withKeyName("sessions_user_fkey");
    t.timestamp("created_at", { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.timestamp("last_seen_at", { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.timestamp("expires_at", { useTz: true })
      .notNullable()
      .comment("absolute expiry; idle expiry is last_seen_at + the idle limit");
    t.text("user_agent");
    t.check("expires_at > created_at", [], "sessions_expiry_check");
  });
  await knex.raw("create index sessions_user_idx on sessions (user_id)");

  await knex.schema.createTable("contracts", (t) => {
    t.uuid("id").primary({ constraintName: "contracts_pkey" }).defaultTo(knex.raw("gen_random_uuid()"));
    t.uuid("owner_id")
      .notNullable()
      .references("id")
      .inTable("organisations")
      .onDelete("RESTRICT")
      .withKeyName("contracts_owner_fkey");
    t.uuid("contractor_id")
      .notNullable()
      .references("id")
      .inTable("organisations")
      .onDelete("RESTRICT")
      .withKeyName("contracts_contractor_fkey");
    t.text("reference").notNullable().comment("the owner's contract or purchase-order number");
    t.specificType("scope", "text[]")
      .notNullable()
      .comment("work the contractor may record: coupon_monitoring, thickness_inspection");
    t.date("starts_on").notNullable();
    t.date("ends_on").comment("last day covered (inclusive); null = open-ended");
    t.timestamps(true, true);
    t.check(
      "cardinality(scope) > 0 and scope <@ array['coupon_monitoring', 'thickness_inspection']::text[]",
      [],
      "contracts_scope_check",
    );
    t.check("ends_on is null or ends_on >= starts_on", [], "contracts_dates_check");
    t.check("owner_id <> contractor_id", [], "contracts_parties_check");
    t.unique(["owner_id", "reference"], { indexName: "contracts_owner_reference_key" });
  });
  await knex.raw(`
    create function contracts_parties_kinds() returns trigger language plpgsql as $$
    begin
      if not exists (select 1 from organisations where id = new.owner_id and kind = 'owner')
         or not exists (select 1 from organisations where id = new.contractor_id and kind = 'contractor') then
        raise exception 'a contract links an owner to a contractor' using errcode = '23514';
      end if;
      return new;
    end $$;
    create trigger contracts_parties_kinds before insert or update of owner_id, contractor_id on contracts
      for each row execute function contracts_parties_kinds();
  `);

  await knex.schema.createTable("contract_sites", (t) => {
    t.uuid("contract_id")
      .notNullable()
      .references("id")
      .inTable("contracts")
      .onDelete("CASCADE")
      .withKeyName("contract_sites_contract_fkey");
    t.uuid("site_id")
      .notNullable()
      .references("id")
      .inTable("sites")
      .onDelete("RESTRICT")
      .withKeyName("contract_sites_site_fkey");
    t.primary(["contract_id", "site_id"], { constraintName: "contract_sites_pkey" });
  });
  await knex.raw("create index contract_sites_site_idx on contract_sites (site_id)");
  await knex.raw(`
    create function contract_sites_same_owner() returns trigger language plpgsql as $$
    begin
      if not exists (select 1 from contracts c join sites s on s.owner_id = c.owner_id
                     where c.id = new.contract_id and s.id = new.site_id) then
        raise exception 'a contract can cover only its owner''s sites' using errcode = '23514';
      end if;
      return new;
    end $$;
    create trigger contract_sites_same_owner before insert or update on contract_sites
      for each row execute function contract_sites_same_owner();
  `);

  await knex.schema.createTable("api_clients", (t) => {
    t.uuid("id").primary({ constraintName: "api_clients_pkey" }).defaultTo(knex.raw("gen_random_uuid()"));
    t.uuid("owner_id")
      .notNullable()
      .references("id")
      .inTable("organisations")
      .onDelete("RESTRICT")
      .withKeyName("api_clients_owner_fkey");
    t.text("name").notNullable();
    t.specificType("scopes", "text[]").notNullable();
    t.text("token_hash")
      .notNullable()
      .comment("sha256 of the bearer token, hex; the token is shown once and never stored");
    t.text("token_hint").notNullable().comment("first characters of the token, to tell clients apart");
    t.uuid("created_by")
      .references("id")
      .inTable("users")
      .onDelete("SET NULL")
      .withKeyName("api_clients_created_by_fkey");
    t.timestamp("created_at", { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.timestamp("last_used_at", { useTz: true });
    t.timestamp("revoked_at", { useTz: true });
    t.uuid("revoked_by")
      .references("id")
      .inTable("users")
      .onDelete("SET NULL")
      .withKeyName("api_clients_revoked_by_fkey");
    t.check(
      "cardinality(scopes) > 0 and scopes <@ array['lims:write', 'results:read', 'outlook:read']::text[]",
      [],
      "api_clients_scopes_check",
    );
    t.check("length(trim(name)) > 0", [], "api_clients_name_check");
  });
  await knex.raw("create unique index api_clients_token_hash_key on api_clients (token_hash)");

  // The audit trail: append-only, hash-chained per owner. Each row's hash covers its
  // content and the previous row's hash for the same owner, so a changed or removed
  // row breaks the chain (checked by `npm run audit:verify` and the tests).
  await knex.schema.createTable("audit_events", (t) => {
    t.bigIncrements("id", { primaryKey: true });
    t.uuid("owner_id")
      .notNullable()
      .references("id")
      .inTable("organisations")
      .onDelete("RESTRICT")
      .withKeyName("audit_events_owner_fkey")
      .comment("the tenant whose trail this event belongs to");
    t.uuid("actor_user_id")
      .references("id")
      .inTable("users")
      .onDelete("RESTRICT")
      .withKeyName("audit_events_actor_fkey");
    t.uuid("actor_organisation_id")
      .references("id")
      .inTable("organisations")
      .onDelete("RESTRICT")
      .withKeyName("audit_events_actor_org_fkey");
    t.text("actor_label")
      .notNullable()
      .comment("who acted, as shown at the time (e-mail, API client name or 'system')");
    t.text("action").notNullable();
    t.text("record_type").notNullable();
    t.text("record_id").notNullable();
    t.jsonb("before");
    t.jsonb("after");
    t.text("reason");
    t.text("request_id");
    t.timestamp("created_at", { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.text("prev_hash");
    t.text("hash").notNullable();
  });
  await knex.raw("create index audit_events_owner_idx on audit_events (owner_id, id)");
  await knex.raw("create index audit_events_record_idx on audit_events (record_type, record_id)");
  await knex.raw(`
    create function audit_event_hash(e audit_events) returns text language sql immutable as $$
      select encode(sha256(convert_to(coalesce(e.prev_hash, '') || '|' || jsonb_build_object(
        'id', e.id, 'owner_id', e.owner_id, 'actor_user_id', e.actor_user_id,
        'actor_organisation_id', e.actor_organisation_id, 'actor_label', e.actor_label,
        'action', e.action, 'record_type', e.record_type, 'record_id', e.record_id,
        'before', e.before, 'after', e.after, 'reason', e.reason, 'request_id', e.request_id,
        'created_at', to_char(e.created_at at time zone 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US"Z"')
      )::text, 'UTF8')), 'hex')
    $$;

    create function audit_events_chain() returns trigger language plpgsql as $$
    begin
      -- one writer per owner at a time, so two events never claim the same predecessor
      perform pg_advisory_xact_lock(hashtextextended('audit:' || new.owner_id::text, 0));
      select hash into new.prev_hash from audit_events where owner_id = new.owner_id order by id desc limit 1;
      new.created_at := coalesce(new.created_at, now());
      new.hash := audit_event_hash(new);
      return new;
    end $$;
    create trigger audit_events_chain before insert on audit_events
      for each row execute function audit_events_chain();

    create function audit_events_append_only() returns trigger language plpgsql as $$
    begin
      raise exception 'audit_events is append-only' using errcode = '42501';
    end $$;
    create trigger audit_events_append_only before update or delete on audit_events
      for each row execute function audit_events_append_only();
    create trigger audit_events_no_truncate before truncate on audit_events
      for each statement execute function audit_events_append_only();
  `);
  // The application's own role may only read and append.
  await knex.raw("revoke update, delete, truncate on audit_events from current_user");
}

export async function down(knex: Knex): Promise<void> {
  await knex.raw("drop table if exists audit_events cascade");
  await knex.raw("drop function if exists audit_events_chain() cascade");
  await knex.raw("drop function if exists audit_events_append_only() cascade");
  await knex.raw("drop function if exists audit_event_hash(audit_events) cascade");
  await knex.schema.dropTableIfExists("api_clients");
  await knex.schema.dropTableIfExists("contract_sites");
  await knex.raw("drop function if exists contract_sites_same_owner() cascade");
  await knex.schema.dropTableIfExists("contracts");
  await knex.raw("drop function if exists contracts_parties_kinds() cascade");
  await knex.schema.dropTableIfExists("sessions");
  await knex.schema.dropTableIfExists("users");
  await knex.raw("drop function if exists users_role_matches_organisation() cascade");
}
