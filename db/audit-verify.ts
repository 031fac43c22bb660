/**
 * `npm run audit:verify`: recomputes every owner's audit hash chain and reports events
 * that were edited (content no longer matches its hash) or removed (a successor points
 * at a hash that is not its predecessor's). Exits 1 when anything is broken.
 */
import knexFactory from "knex";
import config from "../knexfile";
import { verifyAuditChain } from "../app/models/audit.server";

const knex = knexFactory({ ...config, connection: process.env.DATABASE_URL ?? config.connection });
try {
  const reports = await verifyAuditChain(knex);
  const names = new Map<string, string>(
    (await knex("organisations").select("id", "name")).map((o: { id: string; name: string }) => [o.id, o.name]),
  );
  let broken = 0;
  for (const r of reports) {
    const name = names.get(r.ownerId) ?? r.ownerId;
    if (r.broken.length === 0) console.log(`intact  ${name}: ${r.events} events`);
    else {
      broken += r.broken.length;
      console.log(`BROKEN  ${name}: ${r.broken.length} of ${r.events} events`);
      for (const b of r.broken) console.log(`        event ${b.id}: ${b.problem}`);
    }
  }
  if (reports.length === 0) console.log("no audit events yet");
  process.exitCode = broken > 0 ? 1 : 0;
} finally {
  await knex.destroy();
}
