/**
 * `npm run db:reset`: drops every table of the configured database, migrates and loads
 * the demo scenario. Refuses to run against anything but the loopback address unless
 * WALLCAST_ALLOW_RESET=1 is set, so a production DATABASE_URL is never wiped by accident.
 */
import knexFactory from "knex";
import config from "../knexfile";

const url = new URL(process.env.DATABASE_URL ?? String(config.connection));
if (!["127.0.0.1", "localhost", "[::1]"].includes(url.hostname) && process.env.WALLCAST_ALLOW_RESET !== "1") {
  console.error(`db:reset refuses to wipe ${url.hostname}: set WALLCAST_ALLOW_RESET=1 if you mean it.`);
  process.exit(1);
}
const knex = knexFactory({ ...config, connection: url.toString() });
try {
  await knex.raw("drop schema public cascade");
  await knex.raw("create schema public");
  const [, applied] = (await knex.migrate.latest()) as [number, string[]];
  console.log(`db:reset applied ${applied.length} migration(s)`);
  await knex.seed.run();
  console.log("db:reset loaded the demo scenario");
} finally {
  await knex.destroy();
}
