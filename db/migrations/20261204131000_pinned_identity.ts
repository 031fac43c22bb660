import type { Knex } from "knex";

/**
 * The identity a person's first sign-in binds to them: the provider's issuer and subject.
 * A later sign-in with the same e-mail address but another issuer or subject is refused
 * until an administrator resets the binding (both columns back to null).
 * Existing subjects were recorded without their issuer; they are kept, and the next
 * sign-in with the same subject fills the issuer in.
 */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.alterTable("users", (t) => {
    t.text("idp_issuer").comment("the IdP's iss claim, bound at first sign-in with idp_subject");
    t.timestamp("identity_bound_at", { useTz: true }).comment("when issuer and subject were bound");
  });
  await knex.raw(`
    comment on column users.idp_subject is 'the IdP''s sub claim, bound at first sign-in; null: the next sign-in binds';
    create unique index users_idp_identity_key on users (idp_issuer, idp_subject)
      where idp_issuer is not null and idp_subject is not null;
  `);
}

export async function down(knex: Knex): Promise<void> {
  await knex.raw("drop index if exists users_idp_identity_key");
  await knex.schema.alterTable("users", (t) => {
    t.dropColumn("identity_bound_at");
    t.dropColumn("idp_issuer");
  });
}
