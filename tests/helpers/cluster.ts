import { execFile } from "node:child_process";
import { freePort } from "./ports";
import { rmSync } from "node:fs";
import path from "node:path";
import { fileURLToPath } from "node:url";
import { promisify } from "node:util";
import knexFactory, { type Knex } from "knex";
import type { TestDatabase } from "./db";

const root = fileURLToPath(new URL("../..", import.meta.url));
const run = promisify(execFile);

/**
 * A PostgreSQL cluster of a test's own (db/cluster.sh on a free port, instance
 * `pg-fault-<port>`), for tests that stop and start the server: the runner's shared
 * cluster is never touched. `database` is the cluster's app database, migrated.
 * `remove()` stops the cluster and deletes its folder and log.
 */
export type PrivateCluster = {
  port: number;
  database: TestDatabase;
  stop(): Promise<void>;
  start(): Promise<void>;
  remove(): Promise<void>;
};

export async function startPrivateCluster(): Promise<PrivateCluster> {
  const port = await freePort();
  const instance = `pg-fault-${port}`;
  const env = { ...process.env, WALLCAST_PG_PORT: String(port), WALLCAST_PG_INSTANCE: instance };
  const script = path.join(root, "db", "cluster.sh");
  const cluster = (command: string) => run("bash", [script, command], { env, cwd: root });

  await cluster("start");
  const url = (await cluster("url")).stdout.trim();
  const dataDir = (await cluster("datadir")).stdout.trim();
  const { default: config } = await import("../../knexfile");
  const migrator = knexFactory({ ...config, connection: url });
  try {
    await migrator.migrate.latest();
  } finally {
    await migrator.destroy();
  }
  const knex: Knex = knexFactory({ client: "pg", connection: url, pool: { min: 0, max: 5 } });
  const database: TestDatabase = { url, name: "wallcast", knex, drop: async () => knex.destroy() };
  return {
    port,
    database,
    stop: async () => void (await cluster("stop")),
    start: async () => void (await cluster("start")),
    async remove() {
      await knex.destroy().catch(() => undefined);
      await cluster("stop").catch(() => undefined);
      rmSync(path.join(dataDir, instance), { recursive: true, force: true });
      rmSync(path.join(dataDir, `${instance}.log`), { force: true });
    },
  };
}
