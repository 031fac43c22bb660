import knexFactory, { type Knex } from "knex";
import pg from "pg";
import { env } from "./env.server";

// NUMERIC and BIGINT arrive as strings by default; counts and measured values are
// converted where they are read (models), so nothing here changes pg's parsers
// except dates: DATE columns stay "YYYY-MM-DD" strings instead of local-midnight Dates.
pg.types.setTypeParser(pg.types.builtins.DATE, (v: string) => v);

let instance: Knex | undefined;

/**
 * The pool's limits (env-overridable, see env.server.ts): a statement is cancelled after
 * 15 s, a connection idle inside a transaction is closed after 30 s (its locks go with it),
 * and opening a connection or waiting for a free one gives up after 5 s — so one stuck
 * request cannot hold the per-owner audit lock or starve the pool for long.
 */
export function poolConfig(): Knex.Config {
  const e = env();
  return {
    client: "pg",
    connection: {
      connectionString: e.DATABASE_URL,
      statement_timeout: e.DATABASE_STATEMENT_TIMEOUT_MS,
      idle_in_transaction_session_timeout: e.DATABASE_IDLE_IN_TRANSACTION_TIMEOUT_MS,
      connectionTimeoutMillis: e.DATABASE_CONNECT_TIMEOUT_MS,
    },
    pool: { min: 0, max: e.DATABASE_POOL_MAX },
    acquireConnectionTimeout: e.DATABASE_CONNECT_TIMEOUT_MS,
  };
}

/** The app's connection pool (one per process). */
export function db(): Knex {
  instance ??= knexFactory(poolConfig());
  return instance;
}

export type Db = Knex | Knex.Transaction;

export async function closeDb(): Promise<void> {
  const current = instance;
  instance = undefined;
  await current?.destroy();
}

export async function checkDb(): Promise<"ok" | string> {
  try {
    await db().raw("select 1");
    return "ok";
  } catch (error) {
    return `unreachable (${(error as Error).message.split("\n")[0]})`;
  }
}
