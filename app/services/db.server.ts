import knexFactory, { type Knex } from "knex";
import pg from "pg";
import { env } from "./env.server";

// NUMERIC and BIGINT arrive as strings by default; counts and measured values are
// converted where they are read (models), so nothing here changes pg's parsers
// except dates: DATE columns stay "YYYY-MM-DD" strings instead of local-midnight Dates.
pg.types.setTypeParser(pg.types.builtins.DATE, (v: string) => v);

let instance: Knex | undefined;

/**
 * The app's connection pool (one per process). While PostgreSQL is down or restarting,
 * a request waits at most DATABASE_CONNECT_TIMEOUT_MS for a new connection and
 * DATABASE_ACQUIRE_TIMEOUT_MS for a pooled one, then fails with an error that
 * `isDatabaseUnavailable` recognises (answered 503). Connections broken by a restart are
 * dropped from the pool and new ones opened, so the app recovers without a restart.
 */
export function db(): Knex {
  const settings = env();
  instance ??= knexFactory({
    client: "pg",
    connection: {
      connectionString: settings.DATABASE_URL,
      connectionTimeoutMillis: settings.DATABASE_CONNECT_TIMEOUT_MS,
    },
    pool: { min: 0, max: settings.DATABASE_POOL_MAX },
    acquireConnectionTimeout: settings.DATABASE_ACQUIRE_TIMEOUT_MS,
  });
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
