import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { listAudit, type Actor } from "../../app/models/audit.server";
import { createCircuit, listCircuits, updateCircuit } from "../../app/models/circuits.server";
import {
  cmlsOfCircuits,
  createCml,
  replaceComponent,
  replacementsOfCircuit,
  setCmlRetired,
  updateCml,
} from "../../app/models/cmls.server";
import { createUnit } from "../../app/models/process-units.server";
import { createSite } from "../../app/models/sites.server";
import { NotFoundInTenant } from "../../app/services/outcome";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { outcomeOf } from "../helpers/outcome";

/** CMLs of a circuit: set-up, tags unique per owner, retirement, replaced components, the list. */

let db: TestDatabase;
let ownerA: string;
let ownerB: string;
let engineerA: Actor;
let engineerB: Actor;
let siteA: string;
let unitA: string;
let circuitA: string;
let circuitA2: string;
let circuitB: string;

const day = (offset: number) => new Date(Date.now() + offset * 86_400_000).toISOString().slice(0, 10);

beforeAll(async () => {
  db = await createTestDatabase();
  const [a, b] = await db
    .knex("organisations")
    .insert([
      { name: "Halvard Petroleum", kind: "owner" },
      { name: "Osterby Chemicals", kind: "owner" },
    ])
    .returning("id");
  ownerA = a.id;
  ownerB = b.id;
  const [ua, ub] = await db
    .knex("users")
    .insert([
      { organisation_id: ownerA, email: "engineer@halvard.example", role: "integrity_engineer", status: "active" },
      { organisation_id: ownerB, email: "engineer@osterby.example", role: "integrity_engineer", status: "active" },
    ])
    .returning(["id", "email"]);
  engineerA = { userId: ua.id, organisationId: ownerA, label: ua.email };
  engineerB = { userId: ub.id, organisationId: ownerB, label: ub.email };
  const plant = async (ownerId: string, actor: Actor, code: string) => {
    const site = await outcomeOf(
      createSite(db.knex, ownerId, actor, { name: `Plant ${code}`, code, time_zone: "UTC" }),
    );
    if (!site.ok) throw new Error(JSON.stringify(site.errors));
    const unit = await outcomeOf(createUnit(db.knex, ownerId, actor, site.id, { tag: "U-100", description: "" }));
    if (!unit.ok) throw new Error(JSON.stringify(unit.errors));
    return { siteId: site.id, unitId: unit.id };
  };
  const pa = await plant(ownerA, engineerA, "CM1");
  siteA = pa.siteId;
  unitA = pa.unitId;
  const pb = await plant(ownerB, engineerB, "CM2");
  const made = async (ownerId: string, actor: Actor, siteId: string, input: Record<string, string>) => {
    const r = await outcomeOf(createCircuit(db.knex, ownerId, actor, siteId, input));
    if (!r.ok) throw new Error(JSON.stringify(r.errors));
    return r.id;
  };
  // Invented NPS 6 Sch 40 line with a nominal wall given, the default 12.5 % mill under-tolerance.
  circuitA = await made(ownerA, engineerA, siteA, {
    unit_id: unitA,
    tag: "C-1",
    material: "carbon-steel",
    nps: "6",
    schedule: "40",
    nominal_wall_mm: "8",
  });
  circuitA2 = await made(ownerA, engineerA, siteA, { unit_id: unitA, tag: "C-2", material: "carbon-steel" });
  circuitB = await made(ownerB, engineerB, pb.siteId, { unit_id: pb.unitId, tag: "C-1", material: "carbon-steel" });
});
afterAll(async () => {
  await db?.drop();
});

describe("CMLs", () => {
  it("adds a CML with its audit event; without a base-line, nominal less mill tolerance stands in", async () => {
    const r = await outcomeOf(
      createCml(db.knex, ownerA, engineerA, circuitA, {
        tag: "C1-E01",
        location: "first elbow after the exchanger",
        component: "elbow",
        injection_point: "off",
      }),
    );
    expect(r).toMatchObject({ ok: true, tag: "C1-E01" });
    if (!r.ok) return;
    const [m] = await cmlsOfCircuits(db.knex, ownerA, [circuitA]);
    // 8 mm × (1 − 12.5/100) = 7 mm, derived from the definition of a mill under-tolerance.
    expect(m).toMatchObject({
      tag: "C1-E01",
      component: "elbow",
      injectionPoint: false,
      recordedBaselineMm: null,
      baseline: { source: "nominal-less-tolerance", thicknessMm: 7, nominalMm: 8, tolerancePct: 12.5 },
      latestReplacement: null,
      lastApprovedReading: null,
      retired: false,
    });
    const trail = await listAudit(db.knex, ownerA, { recordType: "cml", recordId: r.id });
    expect(trail.map((e) => e.action)).toEqual(["cml.created"]);
  });

  it("refuses a tag the owner already uses, on any circuit, with the field named; another owner may use it", async () => {
    const again = await outcomeOf(
      createCml(db.knex, ownerA, engineerA, circuitA2, { tag: "C1-E01", component: "pipe" }),
    );
    expect(again).toEqual({ ok: false, errors: { tag: "This owner already has a CML tagged C1-E01." } });
    const other = await outcomeOf(
      createCml(db.knex, ownerB, engineerB, circuitB, { tag: "C1-E01", component: "pipe" }),
    );
    expect(other.ok).toBe(true);
  });

  it("names every bad field at once and writes nothing", async () => {
    const [{ n: before }] = await db.knex("cmls").count<{ n: string }[]>({ n: "*" });
    const r = await outcomeOf(
      createCml(db.knex, ownerA, engineerA, circuitA, {
        tag: "",
        component: "bend",
        baseline_thickness_mm: "7,2",
        baseline_on: "2026-02-30",
        injection_point: "maybe",
      }),
    );
    expect(r.ok).toBe(false);
    if (r.ok) return;
    expect(Object.keys(r.errors).sort()).toEqual([
      "baseline_on",
      "baseline_thickness_mm",
      "component",
      "injection_point",
      "tag",
    ]);
    const [{ n: after }] = await db.knex("cmls").count<{ n: string }[]>({ n: "*" });
    expect(after).toBe(before);
  });

  it("refuses a base-line dated after today at the site", async () => {
    const r = await outcomeOf(
      createCml(db.knex, ownerA, engineerA, circuitA, { tag: "C1-P09", component: "pipe", baseline_on: day(3) }),
    );
    expect(r.ok).toBe(false);
    if (!r.ok) expect(r.errors.baseline_on).toMatch(/is after today/);
  });

  it("edits a CML: the recorded base-line replaces nominal less tolerance; an unchanged form changes nothing", async () => {
    const created = await outcomeOf(
      createCml(db.knex, ownerA, engineerA, circuitA, { tag: "C1-T02", component: "tee", injection_point: "on" }),
    );
    if (!created.ok) throw new Error("create failed");
    const form = {
      tag: "C1-T02",
      location: "injection tee",
      component: "tee",
      injection_point: "on",
      baseline_thickness_mm: "7.85",
      baseline_on: day(-900),
    };
    const r = await outcomeOf(updateCml(db.knex, ownerA, engineerA, created.id, form));
    expect(r).toMatchObject({ ok: true, changed: true, circuitId: circuitA });
    const again = await outcomeOf(updateCml(db.knex, ownerA, engineerA, created.id, form));
    expect(again).toMatchObject({ ok: true, changed: false });
    const m = (await cmlsOfCircuits(db.knex, ownerA, [circuitA])).find((x) => x.id === created.id);
    expect(m).toMatchObject({
      injectionPoint: true,
      baseline: { source: "recorded", thicknessMm: 7.85, on: day(-900) },
    });
    const trail = await listAudit(db.knex, ownerA, { recordType: "cml", recordId: created.id });
    expect(trail.map((e) => e.action).sort()).toEqual(["cml.created", "cml.updated"]);
  });

  it("retires and returns a CML to use, its history kept; the list can leave retired CMLs out", async () => {
    const created = await outcomeOf(
      createCml(db.knex, ownerA, engineerA, circuitA, { tag: "C1-V03", component: "valve" }),
    );
    if (!created.ok) throw new Error("create failed");
    expect(await outcomeOf(setCmlRetired(db.knex, ownerA, engineerA, created.id, true))).toMatchObject({
      ok: true,
      changed: true,
    });
    expect(await outcomeOf(setCmlRetired(db.knex, ownerA, engineerA, created.id, true))).toMatchObject({
      ok: true,
      changed: false,
    });
    const active = await cmlsOfCircuits(db.knex, ownerA, [circuitA], { activeOnly: true });
    expect(active.map((m) => m.tag)).not.toContain("C1-V03");
    const all = await cmlsOfCircuits(db.knex, ownerA, [circuitA]);
    expect(all.find((m) => m.tag === "C1-V03")?.retired).toBe(true);
    await outcomeOf(setCmlRetired(db.knex, ownerA, engineerA, created.id, false));
    const trail = await listAudit(db.knex, ownerA, { recordType: "cml", recordId: created.id });
    expect(trail.map((e) => e.action).sort()).toEqual(["cml.created", "cml.retired", "cml.returned_to_use"]);
  });

  it("records a replaced component with a dated reason; it becomes the base-line; a future or earlier date is refused", async () => {
    const created = await outcomeOf(
      createCml(db.knex, ownerA, engineerA, circuitA, {
        tag: "C1-R04",
        component: "reducer",
        baseline_thickness_mm: "7.9",
        baseline_on: day(-1000),
      }),
    );
    if (!created.ok) throw new Error("create failed");
    const noReason = await outcomeOf(
      replaceComponent(db.knex, ownerA, engineerA, created.id, { replaced_on: day(-100), reason: "ok" }),
    );
    expect(noReason.ok).toBe(false);
    if (!noReason.ok) expect(Object.keys(noReason.errors)).toEqual(["reason"]);
    const future = await outcomeOf(
      replaceComponent(db.knex, ownerA, engineerA, created.id, { replaced_on: day(5), reason: "renewed" }),
    );
    expect(future.ok).toBe(false);
    if (!future.ok) expect(future.errors.replaced_on).toMatch(/after today/);

    const first = await outcomeOf(
      replaceComponent(db.knex, ownerA, engineerA, created.id, {
        replaced_on: day(-100),
        reason: "Reducer renewed after thinning",
        baseline_thickness_mm: "8.1",
      }),
    );
    expect(first).toMatchObject({ ok: true, tag: "C1-R04" });
    const earlier = await outcomeOf(
      replaceComponent(db.knex, ownerA, engineerA, created.id, { replaced_on: day(-200), reason: "older work" }),
    );
    expect(earlier.ok).toBe(false);
    if (!earlier.ok) expect(earlier.errors.replaced_on).toMatch(/cannot be dated before it/);
    const sameDay = await outcomeOf(
      replaceComponent(db.knex, ownerA, engineerA, created.id, { replaced_on: day(-100), reason: "twice" }),
    );
    expect(sameDay.ok).toBe(false);
    await outcomeOf(
      replaceComponent(db.knex, ownerA, engineerA, created.id, { replaced_on: day(-10), reason: "Renewed again" }),
    );

    const m = (await cmlsOfCircuits(db.knex, ownerA, [circuitA])).find((x) => x.id === created.id);
    // The latest replacement has no thickness: nominal 8 mm less 12.5 % = 7 mm from its date.
    expect(m).toMatchObject({
      recordedBaselineMm: 7.9,
      latestReplacement: { replacedOn: day(-10), reason: "Renewed again", baselineThicknessMm: null },
      baseline: { source: "nominal-less-tolerance", thicknessMm: 7, on: day(-10) },
    });
    const list = await replacementsOfCircuit(db.knex, ownerA, circuitA);
    expect(list.filter((r) => r.cmlId === created.id).map((r) => r.replacedOn)).toEqual([day(-10), day(-100)]);
    const trail = await listAudit(db.knex, ownerA, { recordType: "cml", recordId: created.id });
    expect(trail.filter((e) => e.action === "cml.component_replaced")).toHaveLength(2);
    // Each replacement moves the circuit's remaining life: a recompute run is queued with it.
    const runs = await db
      .knex("life_recompute_runs")
      .where({ owner_id: ownerA, trigger: "design" })
      .where("reason", "like", "A component was replaced at CML C1-R04%")
      .select("reason");
    expect(runs.map((r) => r.reason).sort()).toEqual([
      `A component was replaced at CML C1-R04 on ${day(-100)}.`,
      `A component was replaced at CML C1-R04 on ${day(-10)}.`,
    ]);
  });

  it("is a 404 for another owner's circuit or CML, and lists nothing of theirs", async () => {
    await expect(
      createCml(db.knex, ownerA, engineerA, circuitB, { tag: "X-1", component: "pipe" }),
    ).rejects.toBeInstanceOf(NotFoundInTenant);
    const [foreign] = await cmlsOfCircuits(db.knex, ownerB, [circuitB]);
    await expect(
      updateCml(db.knex, ownerA, engineerA, foreign.id, { tag: "X-2", component: "pipe" }),
    ).rejects.toBeInstanceOf(NotFoundInTenant);
    await expect(setCmlRetired(db.knex, ownerA, engineerA, foreign.id, true)).rejects.toBeInstanceOf(NotFoundInTenant);
    await expect(
      replaceComponent(db.knex, ownerA, engineerA, foreign.id, { replaced_on: day(-1), reason: "renewed" }),
    ).rejects.toBeInstanceOf(NotFoundInTenant);
    expect(await cmlsOfCircuits(db.knex, ownerA, [circuitB])).toEqual([]);
    await expect(updateCml(db.knex, ownerA, engineerA, "not-an-id", {})).rejects.toBeInstanceOf(NotFoundInTenant);
    const [row] = await db.knex("cmls").where({ id: foreign.id }).select("tag", "retired_at");
    expect(row).toEqual({ tag: "C1-E01", retired_at: null });
  });

  it("gives each CML its last approved reading only, for several circuits in one call", async () => {
    const c2 = await outcomeOf(createCml(db.knex, ownerA, engineerA, circuitA2, { tag: "C2-P01", component: "pipe" }));
    if (!c2.ok) throw new Error("create failed");
    const e01 = (await cmlsOfCircuits(db.knex, ownerA, [circuitA])).find((m) => m.tag === "C1-E01")!;
    const contractor = await db.knex("organisations").insert({ name: "Survey Co", kind: "contractor" }).returning("id");
    const survey = async (status: string, on: string, readings: Array<[string, number]>, ref: string) => {
      const [s] = await db
        .knex("submissions")
        .insert({
          owner_id: ownerA,
          site_id: siteA,
          contractor_id: contractor[0].id,
          kind: "thickness",
          status: "returned",
          reference: ref,
        })
        .returning("id");
      await db
        .knex("thickness_readings")
        .insert(readings.map(([cml, t]) => ({ submission_id: s.id, cml_id: cml, measured_on: on, thickness_mm: t })));
      await db
        .knex("submissions")
        .where({ id: s.id })
        .update({ status, decided_at: status === "approved" ? db.knex.fn.now() : null });
    };
    await survey(
      "approved",
      day(-400),
      [
        [e01.id, 7.6],
        [c2.id, 5.5],
      ],
      "CM1-SUB-00001",
    );
    await survey("approved", day(-30), [[e01.id, 7.4]], "CM1-SUB-00002");
    await survey(
      "submitted",
      day(-5),
      [
        [e01.id, 7.1],
        [c2.id, 5.1],
      ],
      "CM1-SUB-00003",
    );
    const list = await cmlsOfCircuits(db.knex, ownerA, [circuitA, circuitA2]);
    expect(list.find((m) => m.id === e01.id)?.lastApprovedReading).toEqual({ measuredOn: day(-30), thicknessMm: 7.4 });
    expect(list.find((m) => m.id === c2.id)?.lastApprovedReading).toEqual({ measuredOn: day(-400), thicknessMm: 5.5 });
    expect(new Set(list.map((m) => m.circuitId))).toEqual(new Set([circuitA, circuitA2]));
  });
});

describe("pipe dimensions from NPS and schedule", () => {
  const base = { unit_id: "", material: "carbon-steel" };
  it("fills a blank outside diameter from the NPS and a blank nominal wall from NPS and schedule", async () => {
    const r = await outcomeOf(
      createCircuit(db.knex, ownerA, engineerA, siteA, {
        ...base,
        unit_id: unitA,
        tag: "PS-1",
        nps: "6",
        schedule: "Sch 40",
      }),
    );
    expect(r.ok).toBe(true);
    const c = (await listCircuits(db.knex, ownerA, siteA)).find((x) => x.tag === "PS-1")!;
    // NPS 6: OD 168.3 mm, Sch 40 wall 7.11 mm — ASME B36.10M (from memory).
    expect(c).toMatchObject({
      outside_diameter_mm: 168.3,
      nominal_wall_mm: 7.11,
      outside_diameter_from_table: true,
      nominal_wall_from_table: true,
      tableSource: {
        outsideDiameter: "from NPS 6 (ASME B36.10M)",
        nominalWall: "from NPS 6 Sch 40 (ASME B36.10M)",
      },
    });
  });

  it("keeps entered values as entered, and names B36.19M for a stainless schedule", async () => {
    const stainless = await outcomeOf(
      createCircuit(db.knex, ownerA, engineerA, siteA, {
        ...base,
        unit_id: unitA,
        tag: "PS-2",
        nps: "2",
        schedule: "10S",
      }),
    );
    const entered = await outcomeOf(
      createCircuit(db.knex, ownerA, engineerA, siteA, {
        ...base,
        unit_id: unitA,
        tag: "PS-2B",
        nps: "2",
        schedule: "40",
        nominal_wall_mm: "4.2",
      }),
    );
    expect([stainless.ok, entered.ok]).toEqual([true, true]);
    const list = await listCircuits(db.knex, ownerA, siteA);
    const s = list.find((x) => x.tag === "PS-2")!;
    // NPS 2: OD 60.3 mm (ASME B36.10M); 10S wall 2.77 mm (ASME B36.19M) — both from memory.
    expect(s).toMatchObject({ outside_diameter_mm: 60.3, nominal_wall_mm: 2.77 });
    expect(s.tableSource).toEqual({
      outsideDiameter: "from NPS 2 (ASME B36.10M)",
      nominalWall: "from NPS 2 10S (ASME B36.19M)",
    });
    const e = list.find((x) => x.tag === "PS-2B")!;
    expect(e).toMatchObject({
      nominal_wall_mm: 4.2,
      nominal_wall_from_table: false,
      outside_diameter_from_table: true,
    });
    expect(e.tableSource.nominalWall).toBeNull();
  });

  it("lets the NPS stand in for the outside diameter in the pressure design fields", async () => {
    const r = await outcomeOf(
      createCircuit(db.knex, ownerA, engineerA, siteA, {
        ...base,
        unit_id: unitA,
        tag: "PS-3",
        nps: "4",
        schedule: "80",
        design_pressure_mpa: "9.5",
        design_temperature_c: "120",
        allowable_stress_mpa: "138",
        joint_factor_e: "1",
      }),
    );
    expect(r.ok).toBe(true);
    const c = (await listCircuits(db.knex, ownerA, siteA)).find((x) => x.tag === "PS-3")!;
    // NPS 4: OD 114.3 mm, Sch 80 wall 8.56 mm, ASME B36.10M (from memory); B31.3 eq. 3a as in
    // the circuit design test: 9.5 × 114.3 / (2 × (138 + 9.5 × 0.4)) = 3.829 mm.
    expect(c.requiredThickness).toMatchObject({ status: "ok", governedBy: "pressure-design" });
    if (c.requiredThickness.status === "ok") expect(c.requiredThickness.requiredMm.toFixed(3)).toBe("3.829");
    expect(c.nominal_wall_mm).toBe(8.56);
  });

  it("leaves them empty where the table has nothing: a size it lacks, a schedule the size is not made in", async () => {
    await outcomeOf(
      createCircuit(db.knex, ownerA, engineerA, siteA, {
        ...base,
        unit_id: unitA,
        tag: "PS-4",
        nps: "30",
        schedule: "40",
      }),
    );
    await outcomeOf(
      createCircuit(db.knex, ownerA, engineerA, siteA, {
        ...base,
        unit_id: unitA,
        tag: "PS-5",
        nps: "3-1/2",
        schedule: "XXS",
      }),
    );
    const list = await listCircuits(db.knex, ownerA, siteA);
    expect(list.find((x) => x.tag === "PS-4")).toMatchObject({ outside_diameter_mm: null, nominal_wall_mm: null });
    expect(list.find((x) => x.tag === "PS-5")).toMatchObject({
      outside_diameter_mm: 101.6,
      nominal_wall_mm: null,
      outside_diameter_from_table: true,
    });
  });

  it("follows a new schedule on update when the wall was from the table, and stops once a wall is entered", async () => {
    const c = (await listCircuits(db.knex, ownerA, siteA)).find((x) => x.tag === "PS-1")!;
    const form = { unit_id: unitA, tag: "PS-1", material: "carbon-steel", nps: "6", schedule: "80" };
    const r = await outcomeOf(updateCircuit(db.knex, ownerA, engineerA, c.id, form));
    expect(r).toMatchObject({ ok: true, changed: true });
    let now = (await listCircuits(db.knex, ownerA, siteA)).find((x) => x.tag === "PS-1")!;
    // NPS 6 Sch 80: 10.97 mm, ASME B36.10M (from memory).
    expect(now.nominal_wall_mm).toBe(10.97);
    await outcomeOf(updateCircuit(db.knex, ownerA, engineerA, c.id, { ...form, nominal_wall_mm: "11.2" }));
    now = (await listCircuits(db.knex, ownerA, siteA)).find((x) => x.tag === "PS-1")!;
    expect(now).toMatchObject({ nominal_wall_mm: 11.2, nominal_wall_from_table: false });
    expect(now.tableSource.nominalWall).toBeNull();
  });
});
