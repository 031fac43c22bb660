import { fileURLToPath } from "node:url";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { nextInspection, remainingLife, thicknessRates, type ThicknessReading } from "../../app/domain/index.ts";
import { verifyAuditChain } from "../../app/models/audit.server";
import { listCircuits } from "../../app/models/circuits.server";
import { cmlsOfCircuits } from "../../app/models/cmls.server";
import { lifeStatus } from "../../app/domain/index.ts";
import { queueLifeRecompute, runLifeRecompute } from "../../app/models/circuit-life.server";
import { createTestDatabase, type TestDatabase } from "../helpers/db";

/**
 * The demo scenario loads into a fresh database (the seeds `npm start` runs), and its thickness
 * surveys play the parts the thickness seed's header names. The figures are worked here with
 * the calculation library (API 570: greater of long- and short-term rate, RL = (t − t_req)/rate,
 * next = min(½ RL, class maximum, 3 years at an injection point)); the seed only chose readings.
 */

let db: TestDatabase;
let ownerId: string;
let siteId: string;

beforeAll(async () => {
  db = await createTestDatabase();
  await db.knex.seed.run({
    directory: fileURLToPath(new URL("../../db/seeds", import.meta.url)),
    loadExtensions: [".ts"],
  });
  ownerId = (await db.knex("organisations").where({ name: "Norvale Energy" }).first("id")).id;
  siteId = (await db.knex("sites").where({ owner_id: ownerId, code: "BWR" }).first("id")).id;
}, 120_000);
afterAll(async () => {
  await db?.drop();
});

const today = () => new Date().toISOString().slice(0, 10);
const daysUntil = (day: string) =>
  Math.round((Date.parse(`${day}T00:00:00Z`) - Date.parse(`${today()}T00:00:00Z`)) / 86_400_000);

/** Each CML's approved readings, oldest first, with its base-line as the initial reading. */
async function historyOf(circuitTag: string) {
  const circuit = (await listCircuits(db.knex, ownerId, siteId)).find((c) => c.tag === circuitTag)!;
  const cmls = await cmlsOfCircuits(db.knex, ownerId, [circuit.id]);
  const rows: Array<{ cml_id: string; measured_on: string; thickness_mm: string }> = await db
    .knex("thickness_readings as r")
    .join("submissions as s", "s.id", "r.submission_id")
    .where("s.status", "approved")
    .whereIn(
      "r.cml_id",
      cmls.map((m) => m.id),
    )
    .orderBy("r.measured_on")
    .select("r.cml_id", db.knex.raw("r.measured_on::text as measured_on"), "r.thickness_mm");
  const required = circuit.requiredThickness.status === "ok" ? circuit.requiredThickness.requiredMm : NaN;
  return cmls.map((m) => {
    const readings: ThicknessReading[] = rows
      .filter((r) => r.cml_id === m.id)
      .map((r) => ({ date: r.measured_on, thicknessMm: Number(r.thickness_mm) }));
    const initial = { date: m.baseline.on!, thicknessMm: m.baseline.thicknessMm! };
    const rates = thicknessRates(readings, initial);
    const rate = Math.max(rates.longTermMmPerYear, rates.shortTermMmPerYear);
    const last = readings[readings.length - 1];
    const life = remainingLife({ actualMm: last.thicknessMm, requiredMm: required, rateMmPerYear: rate });
    const next = nextInspection({
      remainingLifeYears: life,
      pipingClass: m.injectionPoint ? "injection" : (circuit.piping_class as 1 | 2 | 3 | 4),
      inspectedOn: last.date,
    });
    return { tag: m.tag, readings, rates, rate, life, next, last, required, injection: m.injectionPoint };
  });
}

const couponRates = async (circuitTag: string) => {
  const rows: Array<{ rate: number }> = await db
    .knex("coupon_results as r")
    .join("submissions as s", "s.id", "r.submission_id")
    .join("coupon_exposures as e", "e.id", "r.exposure_id")
    .join("monitoring_points as p", "p.id", "e.point_id")
    .join("circuits as c", "c.id", "p.circuit_id")
    .where({ "s.status": "approved", "c.tag": circuitTag })
    .select(db.knex.raw("(r.computed->'rate'->>'mmPerYear')::float as rate"));
  return rows.map((r) => r.rate).filter((r) => Number.isFinite(r));
};

describe("the demo scenario's thickness surveys", () => {
  it("puts 3 to 8 CMLs on each of Brackwater's four circuits with design data, one an injection point", async () => {
    const counts: Array<{ tag: string; n: number }> = await db
      .knex("cmls as m")
      .join("circuits as c", "c.id", "m.circuit_id")
      .groupBy("c.tag")
      .select("c.tag", db.knex.raw("count(*)::int as n"));
    expect(counts.map((c) => c.tag).sort()).toEqual(["CDU-OVHD-01", "CDU-REFL-02", "SWS-BTMS-01", "SWS-FEED-01"]);
    for (const c of counts) expect(c.n).toBeGreaterThanOrEqual(3);
    for (const c of counts) expect(c.n).toBeLessThanOrEqual(8);
    expect(await db.knex("cmls").where({ injection_point: true }).count<{ n: string }[]>({ n: "*" })).toEqual([
      { n: "1" },
    ]);
    const components = await db.knex("cmls").distinct("component");
    expect(components.length).toBeGreaterThanOrEqual(5);
  });

  it("has three approved surveys over two years and one waiting for review, each with its revision", async () => {
    const subs: Array<{ status: string; reference: string; circuits: number; readings: number; revisions: number }> =
      await db
        .knex("submissions as s")
        .where({ kind: "thickness" })
        .orderBy("s.created_at")
        .select(
          "s.status",
          "s.reference",
          db.knex.raw("(select count(*)::int from survey_circuits x where x.submission_id = s.id) as circuits"),
          db.knex.raw("(select count(*)::int from thickness_readings x where x.submission_id = s.id) as readings"),
          db.knex.raw("(select count(*)::int from submission_revisions x where x.submission_id = s.id) as revisions"),
        );
    expect(subs.map((s) => s.status)).toEqual(["approved", "approved", "approved", "submitted"]);
    for (const s of subs) expect(s.reference).toMatch(/^BWR-SUB-\d{5}$/);
    expect(subs.map((s) => s.revisions)).toEqual([1, 1, 1, 1]);
    expect(subs.map((s) => s.readings)).toEqual([17, 17, 12, 5]);
    const first = await db.knex("thickness_readings").min<{ d: string }[]>({ d: "measured_on" });
    expect(daysUntil(new Date(first[0].d).toISOString().slice(0, 10))).toBeLessThan(-600);
  });

  it("files older surveys under the ended thickness contract and recent ones under the current one", async () => {
    const covering = async (day: string) =>
      (
        await db
          .knex("contracts as c")
          .join("contract_sites as cs", "cs.contract_id", "c.id")
          .where({ "cs.site_id": siteId })
          .whereRaw("'thickness_inspection' = any(c.scope)")
          .where("c.starts_on", "<=", day)
          .where((q) => q.whereNull("c.ends_on").orWhere("c.ends_on", ">=", day))
          .select("c.reference")
      ).map((r) => r.reference);
    const days: Array<{ d: string }> = await db
      .knex("thickness_readings")
      .distinct(db.knex.raw("measured_on::text as d"))
      .orderBy("d");
    expect(await covering(days[0].d)).toEqual(["NVE-UT-2024-021"]);
    expect(await covering(days[days.length - 1].d)).toEqual(["NVE-UT-2025-004"]);
  });

  it("has a healthy overhead whose next inspection is capped by its injection point, and UT rates that agree with its coupons", async () => {
    const h = await historyOf("CDU-OVHD-01");
    const governing = h.reduce((a, b) => (b.life < a.life ? b : a));
    expect(governing.life).toBeGreaterThan(5);
    const due = h.map((m) => m.next.dueOn).sort()[0];
    expect(h.find((m) => m.injection)?.next.governedBy).toBe("class-maximum");
    expect(daysUntil(due)).toBeGreaterThan(900);
    const coupons = await couponRates("CDU-OVHD-01");
    const mean = coupons.reduce((a, b) => a + b, 0) / coupons.length;
    expect(Math.max(governing.rate / mean, mean / governing.rate)).toBeLessThan(2);
  });

  it("has a healthy reflux line at its class maximum, and one CML whose wall grew between surveys", async () => {
    const h = await historyOf("CDU-REFL-02");
    for (const m of h) expect(m.life).toBeGreaterThan(20);
    expect(h.filter((m) => m.rates.grew).map((m) => m.tag)).toEqual(["REFL-02-E02"]);
    expect(h.every((m) => m.next.governedBy === "class-maximum")).toBe(true);
  });

  it("has a sour-water feed line due for inspection within 90 days", async () => {
    const h = await historyOf("SWS-FEED-01");
    const due = h.map((m) => m.next.dueOn).sort()[0];
    expect(daysUntil(due)).toBeGreaterThan(0);
    expect(daysUntil(due)).toBeLessThanOrEqual(90);
  });

  it("has a stripper-bottoms CML below required thickness, with UT and coupon rates more than 2× apart", async () => {
    const h = await historyOf("SWS-BTMS-01");
    const below = h.filter((m) => m.last.thicknessMm < m.required);
    expect(below.map((m) => m.tag)).toEqual(["BTMS-01-T02"]);
    const ut = Math.max(...h.map((m) => m.rate));
    const coupons = await couponRates("SWS-BTMS-01");
    const mean = coupons.reduce((a, b) => a + b, 0) / coupons.length;
    expect(ut / mean).toBeGreaterThan(2);
  });

  it("stores what the screens and the API read: each circuit's current life row plays its part", async () => {
    const rows: Array<{
      tag: string;
      condition: string;
      next_inspection_on: string | null;
      flags: Array<{ code: string }>;
    }> = await db
      .knex("circuit_life as l")
      .join("circuits as c", "c.id", "l.circuit_id")
      .where({ "l.owner_id": ownerId, "l.current": true, "c.site_id": siteId })
      .select("c.tag", "l.condition", db.knex.raw("l.next_inspection_on::text as next_inspection_on"), "l.flags");
    const byTag = new Map(rows.map((r) => [r.tag, r]));
    const status = (tag: string) => {
      const r = byTag.get(tag)!;
      return lifeStatus({ condition: r.condition as "assessed", nextInspectionOn: r.next_inspection_on }, today()).code;
    };
    expect(status("CDU-OVHD-01")).toBe("in_service");
    expect(status("CDU-REFL-02")).toBe("in_service");
    expect(status("SWS-FEED-01")).toBe("due_soon");
    expect(status("SWS-BTMS-01")).toBe("below_required");
    expect(byTag.get("SWS-BTMS-01")!.next_inspection_on).toBeNull(); // assessment or repair now, no later date
    expect(byTag.get("SWS-BTMS-01")!.flags.map((f) => f.code)).toContain("coupon-thickness-disagree");
    const grown: Array<{ tag: string }> = await db
      .knex("cml_life as m")
      .join("circuit_life as l", "l.id", "m.circuit_life_id")
      .join("cmls as x", "x.id", "m.cml_id")
      .where({ "l.owner_id": ownerId, "l.current": true })
      .whereRaw("m.flags @> ?::jsonb", [JSON.stringify([{ code: "thickness-growth" }])])
      .select("x.tag");
    expect(grown.map((g) => g.tag)).toEqual(["REFL-02-E02"]);
  });

  it("recomputes the demo owner through a queued run (time printed, not asserted)", async () => {
    const runId = await queueLifeRecompute(db.knex, {
      ownerId,
      trigger: "command",
      reason: "timing the demo owner",
      requestedBy: null,
    });
    const done = await runLifeRecompute(db.knex, runId);
    console.log(`demo owner recompute: ${done.circuits} circuits in ${done.seconds.toFixed(3)} s`);
    expect(done).toMatchObject({ state: "done", circuits: 7 });
  });

  it("leaves the owner's audit trail whole", async () => {
    const [report] = await verifyAuditChain(db.knex, ownerId);
    expect(report.broken).toEqual([]);
    expect(report.events).toBeGreaterThan(8);
  });
});
