import type { Knex } from "knex";

/**
 * The counters of rate-limiter-flexible's PostgreSQL store, shared by every app process.
 * The shape is the one the library's RateLimiterPostgres reads and writes (it inserts
 * positionally: key, points, expire); the app builds its limiters with `tableCreated:
 * true`, so nothing creates tables at run time. One table serves every limit: each
 * limit's keys carry its own prefix.
 */
export async function up(knex: Knex): Promise<void> {
  await knex.raw(`
    create table rate_limits (
      key varchar(255) primary key,
      points integer not null default 0,
      expire bigint
    );
    comment on table rate_limits is 'rate-limiter-flexible counters: <limit>:<who> → points used until expire (ms since 1970)';
    create index rate_limits_expire_idx on rate_limits (expire);
  `);
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.dropTableIfExists("rate_limits");
}
