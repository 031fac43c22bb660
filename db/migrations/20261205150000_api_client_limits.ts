import type { Knex } from "knex";

/**
 * API clients gain an optional expiry (an expired token is refused like a revoked one) and
 * their own request limit per minute (null = the default of the `apiClient` rate limit).
 */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.alterTable("api_clients", (t) => {
    t.timestamp("expires_at", { useTz: true }).comment("the token is refused from this instant; null = no expiry");
    t.integer("requests_per_minute").comment("this client's rate limit; null = the apiClient default (120 a minute)");
    t.check(
      "requests_per_minute is null or requests_per_minute between 1 and 100000",
      [],
      "api_clients_requests_per_minute_check",
    );
  });
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.alterTable("api_clients", (t) => {
    t.dropChecks(["api_clients_requests_per_minute_check"]);
    t.dropColumn("requests_per_minute");
    t.dropColumn("expires_at");
  });
}
