/**
 * How long a lab CSV import of 200 rows takes, and how many queries it issues.
 *
 *   npm run bench:lab-import
 *
 * Starts a PostgreSQL cluster of its own (tests/helpers/cluster.ts; removed at the
 * end), builds the test world, and for each round creates 200 fresh removed coupons
 * waiting for lab results at the contractor's points, then imports one CSV row per
 * coupon into the technician's open draft. Prints one line per round, the medians,
 * and, as the very last line of output, one JSON object:
 * `{ rows, queries, milliseconds, rounds }` (queries and milliseconds are medians).
 */

import type { Knex } from "knex";
import { importLabCsv } from "../../app/models/lab-import.server";
import { startPrivateCluster } from "../helpers/cluster";
import { buildWorld } from "../helpers/fixtures";
import { labCsv, labRecordFor, removedCouponsWaiting } from "../helpers/lab-work";

const ROWS = 200;
const ROUNDS = 5;

function median(values: number[]): number {
  const sorted = [...values].sort((a, b) => a - b);
  const mid = Math.floor(sorted.length / 2);
  return sorted.length % 2 ? sorted[mid] : (sorted[mid - 1] + sorted[mid]) / 2;
}

/** Counts every statement the knex instance sends while `work` runs. */
async function counted<T>(knex: Knex, work: () => Promise<T>): Promise<{ value: T; queries: number }> {
  let queries = 0;
  const listener = () => void (queries += 1);
  knex.on("query", listener);
  try {
    return { value: await work(), queries };
  } finally {
    knex.off("query", listener);
  }
}

async function main() {
  const cluster = await startPrivateCluster();
  try {
    const knex = cluster.database.knex;
    const w = await buildWorld(knex);
    const times: number[] = [];
    const counts: number[] = [];
    for (let round = 1; round <= ROUNDS; round++) {
      const serials = await removedCouponsWaiting(knex, w, `BENCH${round}`, ROWS);
      const csv = labCsv(serials.map((s, i) => labRecordFor(s, i)));
      const started = process.hrtime.bigint();
      const { value, queries } = await counted(knex, () => importLabCsv(knex, w.users.tech, csv));
      const ms = Number(process.hrtime.bigint() - started) / 1e6;
      const saved = value.rows.filter((r) => r.status === "saved").length;
      if (saved !== ROWS) throw new Error(`round ${round}: ${saved} of ${ROWS} rows saved`);
      times.push(ms);
      counts.push(queries);
      console.log(`round ${round}: ${ROWS} rows, ${queries} queries, ${ms.toFixed(1)} ms`);
    }
    const result = {
      rows: ROWS,
      queries: median(counts),
      milliseconds: Number(median(times).toFixed(1)),
      rounds: ROUNDS,
    };
    console.log(`rows: ${result.rows}`);
    console.log(`queries issued (median): ${result.queries}`);
    console.log(`milliseconds (median of ${ROUNDS}): ${result.milliseconds}`);
    console.log(JSON.stringify(result));
  } finally {
    await cluster.remove();
  }
}

await main();
