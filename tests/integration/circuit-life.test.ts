import { execFile } from "node:child_process";
import { promisify } from "node:util";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { circuitRequiredThickness } from "../../app/domain/index.ts";
import "../../app/services/db.server"; // DATE columns as "YYYY-MM-DD", as the app reads them
import { actorOf } from "../../app/models/audit.server";
import {
  circuitLifeDetail,
  circuitLifePage,
  lifeRunsLeftBehind,
  queueLifeRecompute,
  recomputeCircuitLife,
  runLifeRecompute,
} from "../../app/models/circuit-life.server";
import { updateCircuit } from "../../app/models/circuits.server";
import { saveLifePolicy, saveOwnerSettings } from "../../app/models/owner-settings.server";
import { NotFoundInTenant } from "../../app/services/outcome";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, installCoupon, type World } from "../helpers/fixtures";

const run = promisify(execFile);

/**
 * Remaining life stored as versions: the numbers from approved readings, versions that
 * move, runs queued by policy and design changes, growth, below required thickness and
 * its e-mail, coupon rates and estimates, and other owners left alone.
 */

let db: TestDatabase;
let w: World;
let circuitId: string;
let bareCircuitId: string;
let couponCircuitId: string;
let foreignCircuitId: string;
const cml: Record<string, string> = {};
const NOW = new Date("2026-06-01T12:00:00Z");
let surveyNumber = 0;

/** NPS 6 Sch 40 (ASME B36.10M: D = 168.3 mm, t = 7.11 mm) with invented design inputs. */
const design = {
  nps: "6",
  schedule: "40",
  outside_diameter_mm: 168.3,
  nominal_wall_mm: 7.11,
  mill_tolerance_pct: 12.5,
  design_pressure_mpa: 5,
  design_temperature_c: 200,
  allowable_stress_mpa: 137.9,
  joint_factor_e: 1,
  weld_factor_w: 1,
  y_coefficient: 0.4,
  piping_class: 2,
};
// B31.3 eq. (3a), through the library the design page uses
const requiredMm = circuitRequiredThickness({
  pressureMPa: 5,
  outsideDiameterMm: 168.3,
  allowableStressMPa: 137.9,
  jointEfficiency: 1,
  weldStrengthFactor: 1,
  yCoefficient: 0.4,
  nps: 6,
}).requiredMm;

async function newCircuit(siteId: string, tag: string, withDesign: boolean, material = "carbon-steel") {
  const [unit] = await db
    .knex("process_units")
    .insert({ site_id: siteId, tag: `U-${tag}`, description: "" })
    .returning("id");
  const [c] = await db
    .knex("circuits")
    .insert({ unit_id: unit.id, site_id: siteId, tag, material_code: material, ...(withDesign ? design : {}) })
    .returning("id");
  return c.id as string;
}

async function newCml(ownerId: string, circuit: string, tag: string, extra: Record<string, unknown> = {}) {
  const [m] = await db
    .knex("cmls")
    .insert({ owner_id: ownerId, circuit_id: circuit, tag, component: "pipe", ...extra })
    .returning("id");
  cml[tag] = m.id;
  return m.id as string;
}

/** An approved thickness survey: readings inserted while a draft, then submitted and approved. */
async function approvedSurvey(readings: Array<{ cml: string; on: string; mm: number }>, siteId = w.site.id) {
  surveyNumber += 1;
  const [s] = await db
    .knex("submissions")
    .insert({
      owner_id: w.owner.id,
      site_id: siteId,
      contractor_id: w.inspection.id,
      kind: "thickness",
      status: "draft",
      reference: `PA-SUB-T${surveyNumber}`,
    })
    .returning("id");
  await db
    .knex("thickness_readings")
    .insert(readings.map((r) => ({ submission_id: s.id, cml_id: r.cml, measured_on: r.on, thickness_mm: r.mm })));
  await db.knex("submissions").where({ id: s.id }).update({ status: "submitted", submitted_at: db.knex.fn.now() });
  await db.knex("submissions").where({ id: s.id }).update({ status: "approved", decided_at: db.knex.fn.now() });
  return s.id as string;
}

let couponNumber = 0;
/** An approved coupon result at a point, removed on `removedOn`, with the stored rates. */
async function approvedCoupon(circuit: string, material: string, removedOn: string, computed: Record<string, unknown>) {
  couponNumber += 1;
  // a point of its own, so exposures never overlap
  const [point] = await db
    .knex("monitoring_points")
    .insert({
      owner_id: w.owner.id,
      site_id: w.site.id,
      circuit_id: circuit,
      tag: `CP-${couponNumber}00`,
      planned_exposure_days: 90,
      mounting: "intrusive",
    })
    .returning("id");
  const pointId = point.id as string;
  const [coupon] = await db
    .knex("coupons")
    .insert({
      owner_id: w.owner.id,
      serial: `K-${couponNumber}`,
      material_code: material,
      density_g_cm3: 7.86,
      density_source: "test",
      shape: "strip",
      length_mm: 76.2,
      width_mm: 19.05,
      thickness_mm: 3.18,
      hole_diameter_mm: 7.94,
      initial_mass_g: 36.1234,
      balance_resolution_g: 0.0001,
    })
    .returning("id");
  const techRow = {
    id: w.users.tech.id,
    email: "",
    name: "",
    role: w.users.tech.role,
    organisationId: w.monitoring.id,
  };
  const exposure = await installCoupon(db.knex, {
    owner: { id: w.owner.id, name: w.owner.name, kind: "owner" },
    pointId,
    couponId: coupon.id,
    installedAt: `${removedOn}T00:00:00Z`.replace(/^(\d{4})/, (y) => String(Number(y) - 1)),
    by: techRow,
  });
  await db
    .knex("coupon_exposures")
    .where({ id: exposure })
    .update({
      removed_at: `${removedOn}T12:00:00Z`,
      removed_by: w.users.tech.id,
      removed_by_organisation_id: w.monitoring.id,
    });
  const [s] = await db
    .knex("submissions")
    .insert({
      owner_id: w.owner.id,
      site_id: w.site.id,
      contractor_id: w.monitoring.id,
      kind: "coupon",
      status: "draft",
      reference: `PA-SUB-C${couponNumber}`,
    })
    .returning("id");
  await db.knex("coupon_results").insert({
    submission_id: s.id,
    exposure_id: exposure,
    final_mass_g: 36,
    inputs: JSON.stringify({}),
    computed: JSON.stringify(computed),
  });
  await db.knex("submissions").where({ id: s.id }).update({ status: "submitted", submitted_at: db.knex.fn.now() });
  await db.knex("submissions").where({ id: s.id }).update({ status: "approved", decided_at: db.knex.fn.now() });
}

const rates = (general: number, pitting: number | null) => ({
  determinable: true,
  rate: { mmPerYear: general },
  pitting: pitting === null ? null : { mmPerYear: pitting },
});

const current = (circuit: string) => db.knex("circuit_life").where({ circuit_id: circuit, current: true }).first();
const cmlLife = async (circuit: string, tag: string) => {
  const life = await current(circuit);
  return db.knex("cml_life").where({ circuit_life_id: life.id, cml_id: cml[tag] }).first();
};

beforeAll(async () => {
  db = await createTestDatabase();
  w = await buildWorld(db.knex);
  circuitId = await newCircuit(w.site.id, "L-100", true);
  couponCircuitId = await newCircuit(w.site.id, "L-200", true);
  bareCircuitId = (await db.knex("circuits").where({ tag: "C-1", site_id: w.site.id }).first("id")).id;
  foreignCircuitId = await newCircuit(w.foreignSite.id, "Z-1", true);
  await newCml(w.owner.id, circuitId, "A", { baseline_thickness_mm: 7.0, baseline_on: "2016-03-01" });
  await newCml(w.owner.id, circuitId, "B", { baseline_thickness_mm: 6.0 }); // dated at its first reading
  await newCml(w.owner.id, circuitId, "C", { baseline_thickness_mm: 7.0, baseline_on: "2016-03-01" });
  await newCml(w.owner.id, couponCircuitId, "D", { baseline_on: "2016-03-01" }); // commissioned then, never surveyed
  await newCml(w.owner2.id, foreignCircuitId, "Z", { baseline_thickness_mm: 7.0, baseline_on: "2016-03-01" });
  await approvedSurvey([
    { cml: cml.A, on: "2021-03-01", mm: 6.5 },
    { cml: cml.B, on: "2021-03-01", mm: 6.0 },
    { cml: cml.C, on: "2021-03-01", mm: 6.8 },
  ]);
  await approvedSurvey([
    { cml: cml.A, on: "2026-03-01", mm: 6.0 },
    { cml: cml.B, on: "2026-03-01", mm: 6.2 }, // grew: a measurement artefact
    { cml: cml.C, on: "2026-03-01", mm: 6.6 },
  ]);
  await approvedCoupon(circuitId, "carbon-steel", "2026-01-15", rates(0.5, 0.9));
  await approvedCoupon(couponCircuitId, "carbon-steel", "2026-02-15", rates(0.1, 0.25));
  await approvedCoupon(couponCircuitId, "stainless-316", "2026-02-15", rates(0.8, 0.8));
  await approvedCoupon(couponCircuitId, "carbon-steel", "2026-02-20", {
    determinable: false,
    rate: null,
    pitting: null,
  });
}, 60_000);
afterAll(async () => {
  await db?.drop();
});

describe("recomputeCircuitLife", () => {
  it("stores version 1 with the API 570 figures of each CML", async () => {
    const outcome = await db.knex.transaction((trx) =>
      recomputeCircuitLife(trx, { ownerId: w.owner.id, cause: "recompute", now: NOW }),
    );
    expect(outcome.circuits).toBe(3); // C-1, L-100, L-200 of owner one; none of owner two
    const life = await current(circuitId);
    expect(life.version).toBe(1);
    expect(Number(life.required_thickness_mm)).toBeCloseTo(requiredMm, 3);
    // CML A: long-term (7.0 − 6.0) / (3652 d / 365.25) and short-term (6.5 − 6.0) / (1826 d / 365.25) — API 570 [pub]
    const a = await cmlLife(circuitId, "A");
    expect(a.condition).toBe("assessed");
    expect(a.long_term_mm_y).toBeCloseTo(1 / (3652 / 365.25), 10);
    expect(a.short_term_mm_y).toBeCloseTo(0.5 / (1826 / 365.25), 10);
    const rate = 1 / (3652 / 365.25);
    expect(a.remaining_life_conservative_years).toBeCloseTo((6.0 - requiredMm) / rate, 6); // (t − t_req)/rate [pub]
    expect(a.next_inspection_on).toBe("2036-03-01"); // min(½ RL, class 2: 10 y) [pub], calendar years
    // A governs the circuit (C loses 0.2 mm over 10 y, B grew)
    expect(life.governing_cml_id).toBe(cml.A);
    expect(life.condition).toBe("assessed");
    expect(life.rate_source).toBe("thickness");
    expect(life.as_of).toBe("2026-03-01");
    expect(life.formula_version).toMatch(/^wallcast-calc /);
  });

  it("never stores a negative rate for a wall that grew; no loss without a minimum rate has no life", async () => {
    const b = await cmlLife(circuitId, "B");
    expect(b.long_term_mm_y).toBe(0);
    expect(b.short_term_mm_y).toBe(0);
    expect(b.condition).toBe("no_loss");
    expect(b.remaining_life_years).toBeNull();
    expect(b.life_note).toMatch(/No measurable wall loss/);
    expect(b.flags.map((f: { code: string }) => f.code)).toContain("thickness-growth");
  });

  it("a circuit without design data still gets a row, saying what is missing", async () => {
    const life = await current(bareCircuitId);
    expect(life.condition).toBe("no_data");
    expect(life.life_note).toMatch(/^design data missing: design pressure, outside diameter/);
  });

  it("coupon rates: same material and determinable only; without UT history a coupon-based estimate", async () => {
    const life = await current(couponCircuitId);
    expect(life.coupon_rates.maxGeneralMmPerYear).toBe(0.1);
    expect(life.coupon_rates.maxPittingMmPerYear).toBe(0.25);
    expect(life.coupon_rates.used).toHaveLength(1);
    expect(life.coupon_rates.leftOut).toMatchObject({ otherMaterial: 1, notDeterminable: 1 });
    expect(life.rate_source).toBe("coupon-general");
    expect(life.flags.map((f: { code: string }) => f.code)).toContain("coupon-based-estimate");
    // The base-line wall 7.11 × (1 − 0.125) mm from 2016-03-01, worn at 0.1 mm/y to the day of the
    // estimate; then API 570 RL = (wall − t_required) / rate [pub formula]
    const years = (Date.parse(life.as_of) - Date.parse("2016-03-01")) / 86_400_000 / 365.25;
    expect(life.remaining_life_years).toBeCloseTo((7.11 * 0.875 - 0.1 * years - requiredMm) / 0.1, 6);
  });

  it("flags coupon and thickness rates that disagree by more than the owner's factor", async () => {
    const life = await current(circuitId);
    expect(life.coupon_rates.maxGeneralMmPerYear).toBe(0.5);
    expect(life.flags.map((f: { code: string }) => f.code)).toContain("coupon-thickness-disagree");
  });

  it("leaves another owner's circuits alone", async () => {
    expect(await db.knex("circuit_life").where({ circuit_id: foreignCircuitId })).toHaveLength(0);
  });

  it("a second computation keeps version 1 and makes version 2 current", async () => {
    await db.knex.transaction((trx) =>
      recomputeCircuitLife(trx, { ownerId: w.owner.id, circuitIds: [circuitId], cause: "recompute", now: NOW }),
    );
    const rows = await db.knex("circuit_life").where({ circuit_id: circuitId }).orderBy("version");
    expect(rows.map((r) => [r.version, r.current])).toEqual([
      [1, false],
      [2, true],
    ]);
    expect(await db.knex("cml_life").where({ circuit_life_id: rows[0].id })).toHaveLength(3);
  });

  it("an approval that puts a CML below required thickness e-mails the engineers once", async () => {
    const survey = await approvedSurvey([{ cml: cml.C, on: "2026-05-01", mm: 2.9 }]);
    const first = await db.knex.transaction((trx) =>
      recomputeCircuitLife(trx, {
        ownerId: w.owner.id,
        circuitIds: [circuitId],
        cause: "approval",
        causeSubmissionId: survey,
        now: NOW,
      }),
    );
    expect(first.newlyBelowRequired).toEqual([{ circuitId, cmlId: cml.C }]);
    const life = await current(circuitId);
    expect(life.condition).toBe("below_required");
    expect(life.governing_cml_id).toBe(cml.C);
    expect(life.life_note).toMatch(/fitness-for-service assessment or repair needed/);
    const mail = await db.knex("email_outbox").where("event_key", "like", "life.below_required:%");
    expect(mail.map((m) => m.to_email)).toEqual([w.users.engineer.email]); // decideSubmissions: engineers
    expect(mail[0].text).toMatch(/Decision support only/);
    expect(mail[0].text).toMatch(/L-100/);
    // the same finding again adds no message
    const again = await db.knex.transaction((trx) =>
      recomputeCircuitLife(trx, {
        ownerId: w.owner.id,
        circuitIds: [circuitId],
        cause: "approval",
        causeSubmissionId: survey,
        now: NOW,
      }),
    );
    expect(again.newlyBelowRequired).toEqual([]);
    expect(await db.knex("email_outbox").where("event_key", "like", "life.below_required:%")).toHaveLength(1);
  });
});

describe("recompute runs", () => {
  it("a policy change queues a run in the same transaction; the worker makes new versions and audits", async () => {
    const before = await current(circuitId);
    const r = await saveLifePolicy(db.knex, w.owner.id, actorOf(w.users.engineer), {
      rate_policy: "greater_of_long_short",
      minimum_rate_mm_y: "0.05",
      coupon_window_years: "2",
      coupon_rate_basis: "general",
      rate_disagreement_factor: "2",
      max_interval_years: "",
    });
    expect(r.changed).toBe(true);
    const run = await db.knex("life_recompute_runs").where({ id: r.runId }).first();
    expect(run).toMatchObject({ trigger: "policy", state: "queued", owner_id: w.owner.id });
    const done = await runLifeRecompute(db.knex, r.runId as string);
    expect(done).toMatchObject({ state: "done", circuits: 3 });
    const after = await db.knex("life_recompute_runs").where({ id: r.runId }).first();
    expect(after).toMatchObject({ state: "done", circuits_total: 3, circuits_done: 3 });
    expect(after.finished_at).not.toBeNull();
    const life = await current(circuitId);
    expect(life.version).toBe(before.version + 1);
    expect(life.cause).toBe("policy");
    expect(life.cause_run_id).toBe(r.runId);
    // with a stated minimum, the grown CML B has a finite life at 0.05 mm/y
    const b = await cmlLife(circuitId, "B");
    expect(b.condition).toBe("assessed");
    expect(b.governing_rate_mm_y).toBe(0.05);
    const audit = await db.knex("audit_events").where({ action: "life.recomputed", record_id: r.runId }).first();
    expect(audit.reason).toBe("The remaining-life rate policy changed.");
    expect(audit.after).toMatchObject({ trigger: "policy", circuits: 3 });
    // a run already done is left alone
    expect((await runLifeRecompute(db.knex, r.runId as string)).state).toBe("skipped");
  });

  it("a run whose worker died mid-run goes back to the queue and finishes; the sweep finds it", async () => {
    const runId = await queueLifeRecompute(db.knex, {
      ownerId: w.owner.id,
      trigger: "button",
      reason: "worker lost",
      requestedBy: w.users.engineer.id,
    });
    // the worker took it 20 minutes ago and never came back
    await db
      .knex("life_recompute_runs")
      .where({ id: runId })
      .update({ state: "running", started_at: db.knex.raw("now() - interval '20 minutes'"), circuits_done: 1 });
    expect(await lifeRunsLeftBehind(db.knex)).toContain(runId);
    expect(await db.knex("life_recompute_runs").where({ id: runId }).first("state", "circuits_done")).toEqual({
      state: "queued",
      circuits_done: 0,
    });
    expect((await runLifeRecompute(db.knex, runId)).state).toBe("done");
    // a run that is running now is not taken from its worker
    const busy = await queueLifeRecompute(db.knex, {
      ownerId: w.owner.id,
      trigger: "button",
      reason: "still running",
      requestedBy: w.users.engineer.id,
    });
    await db.knex("life_recompute_runs").where({ id: busy }).update({ state: "running", started_at: db.knex.fn.now() });
    expect(await lifeRunsLeftBehind(db.knex)).not.toContain(busy);
    expect((await db.knex("life_recompute_runs").where({ id: busy }).first("state")).state).toBe("running");
  });

  it("threshold and design changes queue runs too", async () => {
    const count = async (trigger: string) =>
      Number((await db.knex("life_recompute_runs").where({ trigger }).count<{ n: string }[]>({ n: "*" }))[0].n);
    await saveOwnerSettings(db.knex, w.owner.id, actorOf(w.users.engineer), {
      general_moderate: "0.03",
      general_high: "0.12",
      general_severe: "0.25",
      minimum_exposure_days: "30",
    });
    expect(await count("thresholds")).toBe(1);
    const unit = await db.knex("circuits").where({ id: couponCircuitId }).first("unit_id");
    await updateCircuit(db.knex, w.owner.id, actorOf(w.users.engineer), couponCircuitId, {
      unit_id: unit.unit_id,
      tag: "L-200",
      material: "carbon-steel",
      ...Object.fromEntries(Object.entries(design).map(([k, v]) => [k, String(v)])),
      design_pressure_mpa: "4",
    });
    expect(await count("design")).toBe(1);
  });

  it("npm run life:recompute runs every circuit of an owner with the reason, and prints the counts", async () => {
    const { stdout } = await run(
      process.execPath,
      ["--import", "tsx", "db/life-recompute.ts", "--owner", w.owner.id, "--reason", "Annual review"],
      {
        env: { ...process.env, DATABASE_URL: db.url },
      },
    );
    expect(stdout).toMatch(/Owner One: 3 circuits recomputed, 1 below required thickness, \d+\.\d s/);
    const runRow = await db.knex("life_recompute_runs").where({ trigger: "command" }).first();
    expect(runRow).toMatchObject({ state: "done", reason: "Annual review", circuits_done: 3 });
    const refused = await run(process.execPath, ["--import", "tsx", "db/life-recompute.ts"], {
      env: { ...process.env, DATABASE_URL: db.url },
    }).catch((error: { code: number; stdout: string }) => error);
    expect(refused).toMatchObject({ code: 1 });
    expect((refused as { stdout: string }).stdout).toMatch(/usage: npm run life:recompute/);
  }, 60_000);
});

describe("reads", () => {
  it("pages the owner's circuits with their status; contractors are told nothing is there", async () => {
    const page = await circuitLifePage(db.knex, w.users.manager, { limit: 2 }, NOW);
    expect(page.items).toHaveLength(2);
    expect(page.nextCursor).toBe(page.items[1].id);
    const rest = await circuitLifePage(db.knex, w.users.manager, { limit: 200, cursor: page.nextCursor! }, NOW);
    expect(rest.items).toHaveLength(1);
    expect(rest.nextCursor).toBeNull();
    await expect(circuitLifePage(db.knex, w.users.tech, { limit: 10 })).rejects.toBeInstanceOf(NotFoundInTenant);
    const detail = await circuitLifeDetail(db.knex, w.users.engineer, circuitId, NOW);
    expect(detail.status.code).toBe("below_required");
    expect(detail.cmls.map((c) => c.tag)).toEqual(["A", "B", "C"]);
    expect(detail.caution).toMatch(/^Decision support only/);
    await expect(circuitLifeDetail(db.knex, w.users.engineer2, circuitId)).rejects.toBeInstanceOf(NotFoundInTenant);
  });
});

describe("a realistic owner", () => {
  it("recomputes 200 circuits, 2,000 CMLs and 20,000 readings (time printed, not asserted)", async () => {
    const [owner] = await db.knex("organisations").insert({ name: "Scale Owner", kind: "owner" }).returning("id");
    const [site] = await db
      .knex("sites")
      .insert({ owner_id: owner.id, name: "Scale Plant", code: "SP", time_zone: "UTC" })
      .returning("id");
    const [unit] = await db
      .knex("process_units")
      .insert({ site_id: site.id, tag: "U-S", description: "" })
      .returning("id");
    await db.knex.raw(
      `insert into circuits (unit_id, site_id, tag, material_code, nps, outside_diameter_mm, nominal_wall_mm, mill_tolerance_pct,
                             design_pressure_mpa, design_temperature_c, allowable_stress_mpa, joint_factor_e, weld_factor_w, piping_class)
       select ?, ?, 'S-' || g, 'carbon-steel', '6', 168.3, 7.11, 12.5, 5, 200, 137.9, 1, 1, 2 from generate_series(1, 200) g`,
      [unit.id, site.id],
    );
    await db.knex.raw(
      `insert into cmls (owner_id, circuit_id, tag, component, baseline_thickness_mm, baseline_on)
       select ?, c.id, c.tag || '-' || g, 'pipe', 7.0, '2010-01-01' from circuits c cross join generate_series(1, 10) g where c.site_id = ?`,
      [owner.id, site.id],
    );
    const [contractor] = await db
      .knex("organisations")
      .insert({ name: "Scale Inspection", kind: "contractor" })
      .returning("id");
    for (let year = 0; year < 10; year++) {
      const [s] = await db
        .knex("submissions")
        .insert({
          owner_id: owner.id,
          site_id: site.id,
          contractor_id: contractor.id,
          kind: "thickness",
          status: "draft",
          reference: `SP-SUB-${year}`,
        })
        .returning("id");
      await db.knex.raw(
        `insert into thickness_readings (submission_id, cml_id, measured_on, thickness_mm)
         select ?, m.id, make_date(2015 + ?, 3, 1), round((6.9 - 0.05 * ? - random() * 0.05)::numeric, 3)
           from cmls m where m.owner_id = ?`,
        [s.id, year, year, owner.id],
      );
      await db.knex("submissions").where({ id: s.id }).update({ status: "submitted" });
      await db.knex("submissions").where({ id: s.id }).update({ status: "approved" });
    }
    const started = performance.now();
    const r = await db.knex.transaction((trx) => recomputeCircuitLife(trx, { ownerId: owner.id, cause: "recompute" }));
    const seconds = (performance.now() - started) / 1000;
    console.log(`life recompute: ${r.circuits} circuits, 2000 CMLs, 20000 readings in ${seconds.toFixed(2)} s`);
    expect(r.circuits).toBe(200);
    expect(Number((await db.knex("cml_life").count<{ n: string }[]>({ n: "*" }))[0].n)).toBeGreaterThanOrEqual(2000);
  });
});
