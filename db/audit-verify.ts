/**
 * `npm run audit:verify`: the full re-verification the nightly job runs — recomputes
 * every owner's audit hash chain from its first event, reports events that were edited
 * (content no longer matches its hash) or removed (a successor points at a hash that is
 * not its predecessor's), and keeps the result for the audit page (and the owner's
 * checkpoint). Exits 1 when anything is broken.
 */
import knexFactory from "knex";
import config from "../knexfile";
import { runFullAuditVerification } from "../app/models/audit.server";

const knex = knexFactory({ ...config, connection: process.env.DATABASE_URL ?? config.connection });
try {
  const reports = await runFullAuditVerification(knex);
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
