import knexFactory, { type Knex } from "knex";
import pg from "pg";
import { env } from "./env.server";

// NUMERIC and BIGINT arrive as strings by default; counts and measured values are
// converted where they are read (models), so nothing here changes pg's parsers
// except dates: DATE columns stay "YYYY-MM-DD" strings instead of local-midnight Dates.
pg.types.setTypeParser(pg.types.builtins.DATE, (v: string) => v);

let instance: Knex | undefined;

/** The app's connection pool (one per process). */
export function db(): Knex {
  instance ??= knexFactory({
    client: "pg",
    connection: env().DATABASE_URL,
    pool: { min: 0, max: env().DATABASE_POOL_MAX },
  });
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
