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
 * opening a connection gives up after DATABASE_CONNECT_TIMEOUT_MS and waiting for a pooled
 * one after DATABASE_ACQUIRE_TIMEOUT_MS — so one stuck request cannot hold the per-owner
 * audit lock or starve the pool for long. While PostgreSQL is down or restarting, such
 * failures are recognised by `isDatabaseUnavailable` (answered 503); connections broken
 * by a restart are dropped from the pool and new ones opened, so the app recovers without
 * a restart.
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
    acquireConnectionTimeout: e.DATABASE_ACQUIRE_TIMEOUT_MS,
  };
}

/** The app's connection pool (one per process). */
export function db(): Knex {
  instance ??= knexFactory(poolConfig());
  return instance;
}

/** Socket errors of a connection that could not be opened or was cut. */
const connectionErrorCodes = new Set([
  "ECONNREFUSED",
  "ECONNRESET",
  "EPIPE",
  "ETIMEDOUT",
  "EHOSTUNREACH",
  "ENETUNREACH",
  "ENOTFOUND",
  "EAI_AGAIN",
]);

/** What node-postgres says when a connection ended under it (these errors carry no code). */
const connectionLostMessages = [
  /Connection terminated/i,
  /Client has encountered a connection error and is not queryable/i,
  /timeout exceeded when trying to connect/i,
  /Client was closed and is not queryable/i,
  /the database system is (starting up|shutting down|in recovery mode)/i,
];

/**
 * Whether an error means "the database cannot be reached just now" rather than a fault
 * of the request or the code: a refused or broken connection, a server shutting down or
 * starting (SQLSTATE 57P01–57P03), a connection exception (class 08), or no pooled
 * connection within the acquire timeout. respond.server.ts answers these 503.
 */
export function isDatabaseUnavailable(error: unknown): boolean {
  if (!(error instanceof Error)) return false;
  if (error.name === "KnexTimeoutError") return true;
  const code = (error as { code?: unknown }).code;
  if (typeof code === "string") {
    if (connectionErrorCodes.has(code)) return true;
    if (code === "57P01" || code === "57P02" || code === "57P03" || code.startsWith("08")) return true;
  }
  if (error instanceof AggregateError && error.errors.some(isDatabaseUnavailable)) return true;
  return connectionLostMessages.some((m) => m.test(error.message));
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
