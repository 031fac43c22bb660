import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { listAudit, type Actor } from "../../app/models/audit.server";
import { createCircuit, listCircuits, updateCircuit } from "../../app/models/circuits.server";
import { createUnit } from "../../app/models/process-units.server";
import { createSite } from "../../app/models/sites.server";
import { NotFoundInTenant } from "../../app/services/outcome";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { outcomeOf } from "../helpers/outcome";

/** A circuit's design data: saved with its audit event, refused whole with every field named. */

let db: TestDatabase;
let ownerA: string;
let ownerB: string;
let engineerA: Actor;
let engineerB: Actor;

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
});
afterAll(async () => {
  await db?.drop();
});

async function plant(ownerId: string, actor: Actor, code: string) {
  const site = await outcomeOf(createSite(db.knex, ownerId, actor, { name: `Plant ${code}`, code, time_zone: "UTC" }));
  if (!site.ok) throw new Error(JSON.stringify(site.errors));
  const unit = await outcomeOf(createUnit(db.knex, ownerId, actor, site.id, { tag: "U-100", description: "" }));
  if (!unit.ok) throw new Error(JSON.stringify(unit.errors));
  return { siteId: site.id, unitId: unit.id };
}

const auditCount = async (ownerId: string) => {
  const [{ n }] = await db.knex("audit_events").where({ owner_id: ownerId }).count<{ n: string }[]>({ n: "*" });
  return Number(n);
};

/** Invented NPS 4 Sch 80 line; S and E are invented design inputs, not looked-up values. */
const nps4 = {
  nps: "4",
  schedule: "80",
  outside_diameter_mm: "114.3",
  nominal_wall_mm: "8.56",
  design_pressure_mpa: "9.5",
  design_temperature_c: "120",
  allowable_stress_mpa: "138",
  joint_factor_e: "1",
  corrosion_allowance_mm: "3",
  piping_class: "2",
};

describe("circuit design data", () => {
  it("saves a circuit without design data and says in words what is missing", async () => {
    const p = await plant(ownerA, engineerA, "DD1");
    const r = await outcomeOf(
      createCircuit(db.knex, ownerA, engineerA, p.siteId, { unit_id: p.unitId, tag: "C-1", material: "carbon-steel" }),
    );
    expect(r.ok).toBe(true);
    const [c] = await listCircuits(db.knex, ownerA, p.siteId);
    expect(c).toMatchObject({ design_pressure_mpa: null, mill_tolerance_pct: 12.5, weld_factor_w: 1 });
    expect(c.requiredThickness).toEqual({
      status: "missing",
      missing: [
        "design pressure",
        "outside diameter",
        "allowable stress S",
        "joint quality factor E",
        "design temperature (or Y)",
        "NPS (or a structural minimum)",
      ],
    });
  });

  it("refuses several bad fields at once, each error naming its field, and writes nothing", async () => {
    const p = await plant(ownerA, engineerA, "DD2");
    const events = await auditCount(ownerA);
    const r = await outcomeOf(
      createCircuit(db.knex, ownerA, engineerA, p.siteId, {
        unit_id: p.unitId,
        tag: "C-2",
        material: "carbon-steel",
        nps: "six",
        design_pressure_mpa: "1,5",
        joint_factor_e: "1.2",
        y_coefficient: "1",
        structural_minimum_mm: "2.5",
        piping_class: "5",
      }),
    );
    expect(r).toEqual({
      ok: false,
      errors: {
        nps: expect.stringMatching(/NPS .*'six' is not one/),
        design_pressure_mpa: expect.stringMatching(/decimal comma/),
        joint_factor_e: expect.stringMatching(/joint quality factor E must be at most 1/),
        y_coefficient: expect.stringMatching(/coefficient Y must be at most 0.9999/),
        outside_diameter_mm: expect.stringMatching(/outside diameter/),
        allowable_stress_mpa: expect.stringMatching(/allowable stress S/),
        structural_minimum_reason: expect.stringMatching(/why this structural minimum/),
        piping_class: expect.stringMatching(/piping class 1, 2, 3 or 4/),
      },
    });
    expect(await db.knex("circuits").where({ site_id: p.siteId }).first("id")).toBeUndefined();
    expect(await auditCount(ownerA)).toBe(events);
  });

  it("needs the design temperature when Y is not given, and not when it is", async () => {
    const p = await plant(ownerA, engineerA, "DD3");
    const base = { unit_id: p.unitId, tag: "C-3", material: "carbon-steel", ...nps4, design_temperature_c: "" };
    const r = await outcomeOf(createCircuit(db.knex, ownerA, engineerA, p.siteId, base));
    expect(r).toEqual({ ok: false, errors: { design_temperature_c: expect.stringMatching(/design temperature/) } });
    const withY = await outcomeOf(
      createCircuit(db.knex, ownerA, engineerA, p.siteId, { ...base, y_coefficient: "0.4" }),
    );
    expect(withY.ok).toBe(true);
  });

  it("saves design data with before and after in the audit event; another owner's circuit is a 404", async () => {
    const p = await plant(ownerA, engineerA, "DD4");
    const created = await outcomeOf(
      createCircuit(db.knex, ownerA, engineerA, p.siteId, { unit_id: p.unitId, tag: "C-4", material: "carbon-steel" }),
    );
    if (!created.ok) throw new Error(JSON.stringify(created.errors));
    const edited = await outcomeOf(
      updateCircuit(db.knex, ownerA, engineerA, created.id, {
        unit_id: p.unitId,
        tag: "C-4",
        material: "carbon-steel",
        ...nps4,
      }),
    );
    expect(edited).toMatchObject({ ok: true, changed: true });
    const [event] = await listAudit(db.knex, ownerA, { recordType: "circuit", recordId: created.id });
    expect(event).toMatchObject({ action: "circuit.updated" });
    expect(event.before).toMatchObject({ design_pressure_mpa: null, outside_diameter_mm: null, nps: null });
    expect(event.after).toMatchObject({
      design_pressure_mpa: 9.5,
      outside_diameter_mm: 114.3,
      allowable_stress_mpa: 138,
      nps: "4",
      piping_class: 2,
      weld_factor_w: 1,
    });

    const again = await outcomeOf(
      updateCircuit(db.knex, ownerA, engineerA, created.id, {
        unit_id: p.unitId,
        tag: "C-4",
        material: "carbon-steel",
        ...nps4,
      }),
    );
    expect(again).toMatchObject({ ok: true, changed: false });

    const before = await db.knex("circuits").where({ id: created.id }).first();
    await expect(
      updateCircuit(db.knex, ownerB, engineerB, created.id, {
        unit_id: p.unitId,
        tag: "C-4",
        material: "carbon-steel",
        ...nps4,
        design_pressure_mpa: "1",
      }),
    ).rejects.toBeInstanceOf(NotFoundInTenant);
    expect(await db.knex("circuits").where({ id: created.id }).first()).toEqual(before);
  });

  it("computes the required thickness from the stored data, with what governed it", async () => {
    const p = await plant(ownerA, engineerA, "DD5");
    const make = (tag: string, extra: Record<string, string>) =>
      createCircuit(db.knex, ownerA, engineerA, p.siteId, {
        unit_id: p.unitId,
        tag,
        material: "carbon-steel",
        ...extra,
      });
    await make("C-51", nps4);
    await make("C-52", { ...nps4, design_pressure_mpa: "0.5" });
    await make("C-53", {
      ...nps4,
      design_pressure_mpa: "0.5",
      structural_minimum_mm: "3.2",
      structural_minimum_reason: "Site rule for vibrating lines",
    });
    await make("C-54", { ...nps4, nps: "30" });
    const byTag = new Map((await listCircuits(db.knex, ownerA, p.siteId)).map((c) => [c.tag, c.requiredThickness]));

    // ASME B31.3 eq. (3a) t = P·D / (2(S·E·W + P·Y)) [published standard]; Y = 0.4 for
    // ferritic steel at ≤ 482 °C (B31.3 Table 304.1.1) [published standard]; W = 1 by default.
    const t51 = (9.5 * 114.3) / (2 * (138 * 1 * 1 + 9.5 * 0.4)); // 3.8288 mm
    expect(byTag.get("C-51")).toMatchObject({ status: "ok", governedBy: "pressure-design", y: 0.4, yFromTable: true });
    const r51 = byTag.get("C-51");
    if (r51?.status !== "ok") throw new Error("C-51 has no required thickness");
    expect(r51.requiredMm).toBeCloseTo(t51, 9);
    expect(r51.corrosionAllowanceMm).toBe(3);

    // 0.5 · 114.3 / (2(138 + 0.2)) = 0.2067 mm, below the API 574 structural minimum for
    // NPS 4 carbon steel, 2.29 mm (0.09 in) [from memory].
    const r52 = byTag.get("C-52");
    expect(r52).toMatchObject({ status: "ok", governedBy: "structural-minimum", requiredMm: 2.29, nps: 4 });
    if (r52?.status === "ok") expect(r52.pressureDesignMm).toBeCloseTo((0.5 * 114.3) / (2 * (138 + 0.5 * 0.4)), 9);

    expect(byTag.get("C-53")).toMatchObject({
      status: "ok",
      governedBy: "owner-minimum",
      requiredMm: 3.2,
      ownerReason: "Site rule for vibrating lines",
    });
    expect(byTag.get("C-54")).toEqual({
      status: "not-applicable",
      message: expect.stringMatching(/NPS 30 is not in the API 574 structural minimum table/),
    });
  });
});
