/**
 * `npm run life:recompute -- --reason "…" [--owner <id>]`: recomputes the remaining life of
 * every circuit of every owner (or of one), as the worker does for a queued run — a run row
 * per owner (trigger "command"), batches of circuits, an audit event — and prints the counts
 * and the time taken. Exits 1 when a run fails or the arguments are wrong.
 */
import { parseArgs } from "node:util";
import knexFactory from "knex";
import config from "../knexfile";
import { queueLifeRecompute, runLifeRecompute } from "../app/models/circuit-life.server";
import { isUuid } from "../app/services/ids";

const { values } = parseArgs({ options: { owner: { type: "string" }, reason: { type: "string" } } });
const reason = values.reason?.trim() ?? "";
if (reason.length < 3 || (values.owner !== undefined && !isUuid(values.owner))) {
  console.log('usage: npm run life:recompute -- --reason "why the remaining life is recomputed" [--owner <owner id>]');
  process.exit(1);
}

const knex = knexFactory({ ...config, connection: process.env.DATABASE_URL ?? config.connection });
try {
  const owners: Array<{ id: string; name: string }> = await knex("organisations")
    .where({ kind: "owner" })
    .modify((q) => (values.owner ? q.where({ id: values.owner }) : q))
    .orderBy("name")
    .select("id", "name");
  if (owners.length === 0) console.log(values.owner ? `no owner ${values.owner}` : "no owners yet");
  let failed = 0;
  const started = Date.now();
  for (const owner of owners) {
    const runId = await queueLifeRecompute(knex, { ownerId: owner.id, trigger: "command", reason, requestedBy: null });
    try {
      const r = await runLifeRecompute(knex, runId);
      console.log(
        `${owner.name}: ${r.circuits} circuits recomputed, ${r.belowRequired} below required thickness, ${r.seconds.toFixed(1)} s`,
      );
    } catch (error) {
      failed += 1;
      console.log(`${owner.name}: FAILED — ${(error as Error).message}`);
    }
  }
  console.log(`${owners.length} owner(s) in ${((Date.now() - started) / 1000).toFixed(1)} s`);
  process.exitCode = failed > 0 || (values.owner && owners.length === 0) ? 1 : 0;
} finally {
  await knex.destroy();
}
