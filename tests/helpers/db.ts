import { randomBytes } from "node:crypto";
import knexFactory, { type Knex } from "knex";

/**
 * A fresh database for one test file, copied from the migrated template that
 * `npm test` prepares. Nothing in it comes from the demo seed.
 */
export type TestDatabase = { url: string; name: string; knex: Knex; drop(): Promise<void> };

function adminUrl(): string {
  const url = process.env.WALLCAST_TEST_ADMIN_URL;
  if (!url) throw new Error("WALLCAST_TEST_ADMIN_URL is not set: run the tests with `npm test`");
  return url;
}

export async function createTestDatabase(): Promise<TestDatabase> {
  const template = process.env.WALLCAST_TEST_TEMPLATE ?? "wallcast_template";
  const name = `wallcast_t_${randomBytes(6).toString("hex")}`;
  const admin = knexFactory({ client: "pg", connection: adminUrl(), pool: { min: 0, max: 1 } });
  try {
    // CREATE DATABASE … TEMPLATE needs the template to have no other connections;
    // retry briefly in case another file is copying it at the same moment.
    for (let attempt = 0; ; attempt++) {
      try {
        await admin.raw(`create database ${name} template ${template}`);
        break;
      } catch (error) {
        if (attempt >= 20 || !/being accessed by other users/.test((error as Error).message)) throw error;
        await new Promise((r) => setTimeout(r, 100 + Math.random() * 200));
      }
    }
  } finally {
    await admin.destroy();
  }
  const url = adminUrl().replace(/\/[^/]+$/, `/${name}`);
  const knex = knexFactory({ client: "pg", connection: url, pool: { min: 0, max: 5 } });
  return {
    url,
    name,
    knex,
    async drop() {
      await knex.destroy();
      const a = knexFactory({ client: "pg", connection: adminUrl(), pool: { min: 0, max: 1 } });
      try {
        // FORCE cannot end an autovacuum worker (a superuser process) that happens to be
        // in the database; wait for it a little. The whole test cluster is removed after
        // the run anyway, so a database left behind is only noted, never a failure.
        for (let attempt = 0; ; attempt++) {
          try {
            await a.raw(`drop database if exists ${name} with (force)`);
            break;
          } catch (error) {
            if (attempt >= 20) {
              process.stderr.write(
                `test database ${name} left for the cluster clean-up: ${(error as Error).message}\n`,
              );
              break;
            }
            await new Promise((r) => setTimeout(r, 250));
          }
        }
      } finally {
        await a.destroy();
      }
    },
  };
}
