import { RouterContextProvider } from "react-router";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { userContext, type Role, type SessionUser } from "../../app/context";
import { couponArea, MATERIALS } from "../../app/domain/index.ts";
import { listAudit, type Actor } from "../../app/models/audit.server";
import { createCircuit, listCircuits, updateCircuit } from "../../app/models/circuits.server";
import {
  couponCsvTemplate,
  describeProblem,
  importCoupons,
  type CsvImportResult,
  type CsvRefusal,
} from "../../app/models/coupon-import.server";
import { couponsPage, createCoupon, listCoupons } from "../../app/models/coupons.server";
import { createPoint, getPoint, listPoints, pointAudit, updatePoint } from "../../app/models/monitoring-points.server";
import { LIFE_POLICY_DEFAULTS, ownerSettings, saveOwnerSettings } from "../../app/models/owner-settings.server";
import { createUnit, listUnits, updateUnit } from "../../app/models/process-units.server";
import { createSite, getSetupSite, listSetupSites, updateSite } from "../../app/models/sites.server";
import { NotFoundInTenant } from "../../app/services/outcome";
import { requireOwnerUser } from "../../app/services/guards.server";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { outcomeOf } from "../helpers/outcome";

let db: TestDatabase;
let ownerA: string;
let ownerB: string;
let contractor: string;
let engineerA: Actor;
let engineerB: Actor;

const strip = {
  material: "carbon-steel",
  shape: "strip",
  length_mm: "76.2",
  width_mm: "12.7",
  thickness_mm: "1.6",
  hole_diameter_mm: "6.4",
  initial_mass_g: "11.8342",
};

beforeAll(async () => {
  db = await createTestDatabase();
  const [a, b, c] = await db
    .knex("organisations")
    .insert([
      { name: "Halvard Petroleum", kind: "owner" },
      { name: "Osterby Chemicals", kind: "owner" },
      { name: "Keelrow Monitoring", kind: "contractor" },
    ])
    .returning("id");
  ownerA = a.id;
  ownerB = b.id;
  contractor = c.id;
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

async function count(table: string, where: Record<string, unknown> = {}) {
  const [{ n }] = await db.knex(table).where(where).count<{ n: string }[]>({ n: "*" });
  return Number(n);
}

/** A site with one unit and one circuit, for the tests that need a place to put points. */
async function plant(ownerId: string, actor: Actor, code: string) {
  const site = await outcomeOf(
    createSite(db.knex, ownerId, actor, { name: `Plant ${code}`, code, time_zone: "Europe/Oslo" }),
  );
  if (!site.ok) throw new Error(JSON.stringify(site.errors));
  const unit = await outcomeOf(
    createUnit(db.knex, ownerId, actor, site.id, { tag: "U-100", description: "Crude distillation" }),
  );
  if (!unit.ok) throw new Error(JSON.stringify(unit.errors));
  const circuit = await outcomeOf(
    createCircuit(db.knex, ownerId, actor, site.id, {
      unit_id: unit.id,
      tag: "C-101",
      material: "carbon-steel",
      service: "crude overhead",
    }),
  );
  if (!circuit.ok) throw new Error(JSON.stringify(circuit.errors));
  return { siteId: site.id, unitId: unit.id, circuitId: circuit.id };
}

describe("sites", () => {
  it("creates a site with a canonical time zone and an upper-case code, and audits it", async () => {
    const r = await outcomeOf(
      createSite(db.knex, ownerA, engineerA, {
        name: "Skarv Refinery",
        code: "skr",
        time_zone: "europe/oslo",
      }),
    );
    expect(r.ok).toBe(true);
    if (!r.ok) return;
    const site = await getSetupSite(db.knex, ownerA, r.id);
    expect(site).toMatchObject({ name: "Skarv Refinery", code: "SKR", time_zone: "Europe/Oslo" });
    const events = await listAudit(db.knex, ownerA, { recordType: "site", recordId: r.id });
    expect(events).toHaveLength(1);
    expect(events[0]).toMatchObject({ action: "site.created", actor_label: "engineer@halvard.example", before: null });
    expect(events[0].after).toMatchObject({ code: "SKR", time_zone: "Europe/Oslo" });
  });

  it("accepts UTC, refuses unknown zones and malformed codes with messages per field", async () => {
    const utc = await outcomeOf(
      createSite(db.knex, ownerA, engineerA, { name: "Offshore hub", code: "OFF-1", time_zone: "UTC" }),
    );
    expect(utc.ok).toBe(true);
    const bad = await outcomeOf(
      createSite(db.knex, ownerA, engineerA, {
        name: " ",
        code: "-no spaces-",
        time_zone: "Mars/Olympus_Mons",
      }),
    );
    expect(bad.ok).toBe(false);
    if (bad.ok) return;
    expect(bad.errors.name).toMatch(/Enter the site’s name/);
    expect(bad.errors.code).toMatch(/capital letters/);
    expect(bad.errors.time_zone).toMatch(/not an IANA time zone/);
  });

  it("refuses a duplicate code as a field error, but another owner may use it", async () => {
    const dup = await outcomeOf(
      createSite(db.knex, ownerA, engineerA, { name: "Second Skarv", code: "SKR", time_zone: "UTC" }),
    );
    expect(dup).toEqual({ ok: false, errors: { code: expect.stringMatching(/already uses the code SKR/) } });
    const other = await outcomeOf(
      createSite(db.knex, ownerB, engineerB, {
        name: "Osterby Skarv",
        code: "SKR",
        time_zone: "UTC",
      }),
    );
    expect(other.ok).toBe(true);
  });

  it("edits a site with before and after in the trail; an unchanged save writes nothing", async () => {
    const r = await outcomeOf(
      createSite(db.knex, ownerA, engineerA, {
        name: "Lindholm Gas",
        code: "LGP",
        time_zone: "Europe/Stockholm",
      }),
    );
    if (!r.ok) throw new Error("setup");
    const same = await outcomeOf(
      updateSite(db.knex, ownerA, engineerA, r.id, {
        name: "Lindholm Gas",
        code: "LGP",
        time_zone: "Europe/Stockholm",
      }),
    );
    expect(same).toEqual({ ok: true, id: r.id, changed: false });
    const edited = await outcomeOf(
      updateSite(db.knex, ownerA, engineerA, r.id, {
        name: "Lindholm Gas Plant",
        code: "LGP",
        time_zone: "Europe/Oslo",
      }),
    );
    expect(edited).toEqual({ ok: true, id: r.id, changed: true });
    const events = await listAudit(db.knex, ownerA, { recordType: "site", recordId: r.id });
    expect(events.map((e) => e.action)).toEqual(["site.updated", "site.created"]);
    expect(events[0].before).toMatchObject({ name: "Lindholm Gas", time_zone: "Europe/Stockholm" });
    expect(events[0].after).toMatchObject({ name: "Lindholm Gas Plant", time_zone: "Europe/Oslo" });
    const clash = await outcomeOf(
      updateSite(db.knex, ownerA, engineerA, r.id, {
        name: "Lindholm Gas Plant",
        code: "SKR",
        time_zone: "UTC",
      }),
    );
    expect(clash.ok).toBe(false);
  });

  it("hides another owner's site: reads find nothing, writes throw not-found and change nothing", async () => {
    const theirs = await outcomeOf(
      createSite(db.knex, ownerB, engineerB, {
        name: "Osterby Works",
        code: "OSW",
        time_zone: "Europe/Berlin",
      }),
    );
    if (!theirs.ok) throw new Error("setup");
    expect(await getSetupSite(db.knex, ownerA, theirs.id)).toBeUndefined();
    expect(await getSetupSite(db.knex, ownerA, "not-a-uuid")).toBeUndefined();
    expect((await listSetupSites(db.knex, ownerA)).map((s) => s.id)).not.toContain(theirs.id);
    await expect(
      outcomeOf(
        updateSite(db.knex, ownerA, engineerA, theirs.id, { name: "Taken over", code: "OSW", time_zone: "UTC" }),
      ),
    ).rejects.toBeInstanceOf(NotFoundInTenant);
    await expect(
      outcomeOf(updateSite(db.knex, ownerA, engineerA, "12345", { name: "x", code: "X", time_zone: "UTC" })),
    ).rejects.toBeInstanceOf(NotFoundInTenant);
    await expect(createUnit(db.knex, ownerA, engineerA, theirs.id, { tag: "U-1" })).rejects.toBeInstanceOf(
      NotFoundInTenant,
    );
    expect(await getSetupSite(db.knex, ownerB, theirs.id)).toMatchObject({ name: "Osterby Works" });
    expect(await count("process_units", { site_id: theirs.id })).toBe(0);
    expect(await listUnits(db.knex, ownerA, theirs.id)).toEqual([]);
  });
});

describe("process units and circuits", () => {
  it("creates units and circuits, refuses duplicate tags within a site as field errors", async () => {
    const p = await plant(ownerA, engineerA, "UNT");
    const dupUnit = await outcomeOf(createUnit(db.knex, ownerA, engineerA, p.siteId, { tag: "U-100" }));
    expect(dupUnit).toEqual({ ok: false, errors: { tag: expect.stringMatching(/already has a unit tagged U-100/) } });
    const dupCircuit = await outcomeOf(
      createCircuit(db.knex, ownerA, engineerA, p.siteId, {
        unit_id: p.unitId,
        tag: "C-101",
        material: "ss-316",
      }),
    );
    expect(dupCircuit).toEqual({
      ok: false,
      errors: { tag: expect.stringMatching(/already has a circuit tagged C-101/) },
    });
    const badTag = await outcomeOf(createUnit(db.knex, ownerA, engineerA, p.siteId, { tag: "#bad" }));
    expect(badTag.ok === false && badTag.errors.tag).toMatch(/Start the unit tag with a letter or digit/);
    const badMaterial = await outcomeOf(
      createCircuit(db.knex, ownerA, engineerA, p.siteId, {
        unit_id: p.unitId,
        tag: "C-102",
        material: "unobtainium",
      }),
    );
    expect(badMaterial.ok === false && badMaterial.errors.material).toMatch(/material from the list/);
    const units = await listUnits(db.knex, ownerA, p.siteId);
    expect(units).toEqual([expect.objectContaining({ tag: "U-100", circuits: 1, points: 0 })]);
    const circuits = await listCircuits(db.knex, ownerA, p.siteId);
    expect(circuits).toEqual([
      expect.objectContaining({
        tag: "C-101",
        unit_tag: "U-100",
        material_code: "carbon-steel",
        service: "crude overhead",
      }),
    ]);
  });

  it("refuses a unit of another site or owner for a circuit, and edits with an audit event", async () => {
    const p = await plant(ownerA, engineerA, "CIR");
    const elsewhere = await plant(ownerA, engineerA, "CIR2");
    const theirs = await plant(ownerB, engineerB, "CIR3");
    for (const unitId of [elsewhere.unitId, theirs.unitId, "nonsense"]) {
      const r = await outcomeOf(
        createCircuit(db.knex, ownerA, engineerA, p.siteId, {
          unit_id: unitId,
          tag: "C-900",
          material: "carbon-steel",
        }),
      );
      expect(r.ok).toBe(false);
      if (!r.ok) expect(r.errors.unit_id).toBeTruthy();
    }
    const edited = await outcomeOf(
      updateCircuit(db.knex, ownerA, engineerA, p.circuitId, {
        unit_id: p.unitId,
        tag: "C-101",
        description: "Overhead line to the drum",
        material: "ss-316l",
        service: "sour water",
      }),
    );
    expect(edited).toMatchObject({ ok: true, changed: true, siteId: p.siteId });
    const [event] = await listAudit(db.knex, ownerA, { recordType: "circuit", recordId: p.circuitId });
    expect(event).toMatchObject({ action: "circuit.updated" });
    expect(event.before).toMatchObject({ material_code: "carbon-steel", service: "crude overhead" });
    expect(event.after).toMatchObject({ material_code: "ss-316l", service: "sour water" });
    await expect(
      outcomeOf(
        updateCircuit(db.knex, ownerB, engineerB, p.circuitId, {
          unit_id: p.unitId,
          tag: "X",
          material: "carbon-steel",
        }),
      ),
    ).rejects.toBeInstanceOf(NotFoundInTenant);
    await expect(updateUnit(db.knex, ownerB, engineerB, p.unitId, { tag: "X" })).rejects.toBeInstanceOf(
      NotFoundInTenant,
    );
    const unit = await outcomeOf(
      updateUnit(db.knex, ownerA, engineerA, p.unitId, { tag: "U-100", description: "Vacuum unit" }),
    );
    expect(unit).toMatchObject({ ok: true, changed: true });
  });
});

describe("monitoring points", () => {
  it("creates a point with a 90-day default, unique tags across the owner's sites, and a trail", async () => {
    const p = await plant(ownerA, engineerA, "PNT");
    const other = await plant(ownerA, engineerA, "PNT2");
    const r = await outcomeOf(
      createPoint(db.knex, ownerA, engineerA, p.siteId, {
        circuit_id: p.circuitId,
        tag: "CP-101",
        access_fitting: "2-in high-pressure access fitting AF-12",
        orientation: "bottom of line, 6 o'clock",
        mounting: "flush",
      }),
    );
    expect(r).toMatchObject({ ok: true, tag: "CP-101" });
    if (!r.ok) return;
    const point = await getPoint(db.knex, ownerA, r.id);
    expect(point).toMatchObject({
      planned_exposure_days: 90,
      active: true,
      site_code: "PNT",
      circuit_tag: "C-101",
      unit_tag: "U-100",
    });

    const dup = await outcomeOf(
      createPoint(db.knex, ownerA, engineerA, other.siteId, {
        circuit_id: other.circuitId,
        tag: "CP-101",
        mounting: "intrusive",
      }),
    );
    expect(dup).toEqual({
      ok: false,
      errors: { tag: expect.stringMatching(/already used by a monitoring point at Plant PNT \(PNT\)/) },
    });
    const dupAndBad = await outcomeOf(
      createPoint(db.knex, ownerA, engineerA, other.siteId, {
        circuit_id: other.circuitId,
        tag: "CP-101",
        mounting: "flush",
        planned_exposure_days: "900",
      }),
    );
    expect(dupAndBad.ok === false && Object.keys(dupAndBad.errors).sort()).toEqual(["planned_exposure_days", "tag"]);

    const theirs = await plant(ownerB, engineerB, "PNT3");
    const sameTagElsewhere = await outcomeOf(
      createPoint(db.knex, ownerB, engineerB, theirs.siteId, {
        circuit_id: theirs.circuitId,
        tag: "CP-101",
        mounting: "flush",
      }),
    );
    expect(sameTagElsewhere.ok).toBe(true);

    expect(await listPoints(db.knex, ownerA, p.siteId)).toEqual([
      expect.objectContaining({ tag: "CP-101", coupon_serial: null }),
    ]);
    expect(await getPoint(db.knex, ownerB, r.id)).toBeUndefined();
  });

  it("refuses out-of-range exposure, a bad mounting and a circuit of another site", async () => {
    const p = await plant(ownerA, engineerA, "PNB");
    const elsewhere = await plant(ownerA, engineerA, "PNB2");
    const bad = await outcomeOf(
      createPoint(db.knex, ownerA, engineerA, p.siteId, {
        circuit_id: p.circuitId,
        tag: "CP-1",
        mounting: "glued",
        planned_exposure_days: "5",
      }),
    );
    expect(bad.ok).toBe(false);
    if (!bad.ok) {
      expect(bad.errors.planned_exposure_days).toBe("The planned exposure must be a whole number from 7 to 730 days.");
      expect(bad.errors.mounting).toMatch(/flush or intrusive/);
    }
    const comma = await outcomeOf(
      createPoint(db.knex, ownerA, engineerA, p.siteId, {
        circuit_id: p.circuitId,
        tag: "CP-1",
        mounting: "flush",
        planned_exposure_days: "90,5",
      }),
    );
    expect(comma.ok === false && comma.errors.planned_exposure_days).toMatch(/decimal comma/);
    const wrongSite = await outcomeOf(
      createPoint(db.knex, ownerA, engineerA, p.siteId, {
        circuit_id: elsewhere.circuitId,
        tag: "CP-1",
        mounting: "flush",
      }),
    );
    expect(wrongSite).toEqual({ ok: false, errors: { circuit_id: expect.stringMatching(/this site’s circuits/) } });
    expect(await count("monitoring_points", { site_id: p.siteId })).toBe(0);
  });

  it("edits every field of a point, records before/after, and keeps the point on its site", async () => {
    const p = await plant(ownerA, engineerA, "PNE");
    const second = await outcomeOf(
      createCircuit(db.knex, ownerA, engineerA, p.siteId, {
        unit_id: p.unitId,
        tag: "C-102",
        material: "ss-316",
      }),
    );
    const elsewhere = await plant(ownerA, engineerA, "PNE2");
    if (!second.ok) throw new Error("setup");
    const r = await outcomeOf(
      createPoint(db.knex, ownerA, engineerA, p.siteId, {
        circuit_id: p.circuitId,
        tag: "CP-201",
        mounting: "flush",
      }),
    );
    if (!r.ok) throw new Error("setup");
    const edited = await outcomeOf(
      updatePoint(db.knex, ownerA, engineerA, r.id, {
        circuit_id: second.id,
        tag: "CP-201A",
        access_fitting: "AF-7",
        orientation: "top of line, 12 o'clock",
        mounting: "intrusive",
        planned_exposure_days: "120",
        active: "off",
      }),
    );
    expect(edited).toEqual({ ok: true, id: r.id, changed: true });
    expect(await getPoint(db.knex, ownerA, r.id)).toMatchObject({
      tag: "CP-201A",
      circuit_tag: "C-102",
      mounting: "intrusive",
      planned_exposure_days: 120,
      active: false,
    });
    const moved = await outcomeOf(
      updatePoint(db.knex, ownerA, engineerA, r.id, {
        circuit_id: elsewhere.circuitId,
        tag: "CP-201A",
        mounting: "flush",
      }),
    );
    expect(moved.ok === false && moved.errors.circuit_id).toMatch(/cannot move to another site/);
    const trail = await pointAudit(db.knex, ownerA, r.id);
    expect(trail.map((e) => e.action)).toEqual(["monitoring_point.updated", "monitoring_point.created"]);
    expect(trail[0].before).toMatchObject({ planned_exposure_days: 90, active: true, mounting: "flush" });
    expect(trail[0].after).toMatchObject({ planned_exposure_days: 120, active: false, mounting: "intrusive" });
    await expect(
      outcomeOf(updatePoint(db.knex, ownerB, engineerB, r.id, { circuit_id: second.id, tag: "X", mounting: "flush" })),
    ).rejects.toBeInstanceOf(NotFoundInTenant);
    expect(await pointAudit(db.knex, ownerB, r.id)).toEqual([]);
  });

  it("counts units, circuits and points per site", async () => {
    const p = await plant(ownerA, engineerA, "CNT");
    await outcomeOf(
      createPoint(db.knex, ownerA, engineerA, p.siteId, {
        circuit_id: p.circuitId,
        tag: "CNT-1",
        mounting: "flush",
      }),
    );
    await outcomeOf(
      createPoint(db.knex, ownerA, engineerA, p.siteId, {
        circuit_id: p.circuitId,
        tag: "CNT-2",
        mounting: "flush",
        active: false,
      }),
    );
    const row = (await listSetupSites(db.knex, ownerA)).find((s) => s.id === p.siteId);
    expect(row).toMatchObject({ units: 1, circuits: 1, points: 2, active_points: 1, coupons_in_service: 0 });
  });
});

describe("coupons", () => {
  it("adds a coupon with the material's density and source, and its exposed area", async () => {
    const r = await outcomeOf(
      createCoupon(db.knex, ownerA, engineerA, {
        serial: "CS-0001",
        ...strip,
        lot: "L-2408",
        certificate: "MC-17",
      }),
    );
    expect(r.ok).toBe(true);
    if (!r.ok) return;
    const expected = couponArea({
      shape: "strip",
      lengthMm: 76.2,
      widthMm: 12.7,
      thicknessMm: 1.6,
      holeDiameterMm: 6.4,
    });
    expect(r.areaCm2).toBeCloseTo(expected, 10);
    const [coupon] = (await listCoupons(db.knex, ownerA)).filter((c) => c.serial === "CS-0001");
    const carbon = MATERIALS.find((m) => m.key === "carbon-steel")!;
    expect(coupon).toMatchObject({
      density_g_cm3: carbon.densityGcm3,
      density_source: carbon.densitySource,
      initial_mass_g: 11.8342,
      balance_resolution_g: 0.0001,
      status: "in_stock",
      lot: "L-2408",
    });
    expect(coupon.area_cm2).toBeCloseTo(expected, 10);
    const [event] = await listAudit(db.knex, ownerA, { recordType: "coupon", recordId: r.id });
    expect(event).toMatchObject({ action: "coupon.created" });
    expect(event.after).toMatchObject({ serial: "CS-0001", shape: "strip" });
  });

  it("turns the geometry check of the calculation library into a field error", async () => {
    const wideHole = await outcomeOf(
      createCoupon(db.knex, ownerA, engineerA, {
        serial: "CS-0002",
        ...strip,
        hole_diameter_mm: "13",
      }),
    );
    expect(wideHole).toEqual({
      ok: false,
      errors: {
        hole_diameter_mm:
          "The hole diameter must be less than the width of 12.7 mm (you gave 13 mm): the hole would be wider than the strip.",
      },
    });
    const discHole = await outcomeOf(
      createCoupon(db.knex, ownerA, engineerA, {
        serial: "CS-0002",
        material: "ss-316",
        shape: "disc",
        diameter_mm: "20",
        thickness_mm: "3",
        hole_diameter_mm: "25",
        initial_mass_g: "8.5",
      }),
    );
    expect(discHole.ok === false && discHole.errors.hole_diameter_mm).toMatch(
      /less than the diameter of 20 mm .*wider than the disc/,
    );
    const missing = await outcomeOf(
      createCoupon(db.knex, ownerA, engineerA, {
        serial: "CS-0002",
        material: "carbon-steel",
        shape: "rod",
        diameter_mm: "6",
        initial_mass_g: "5",
      }),
    );
    expect(missing.ok === false && missing.errors).toMatchObject({
      length_mm: "A rod coupon needs its length.",
      exposed_ends: "A rod coupon needs its number of exposed ends.",
    });
    const extra = await outcomeOf(
      createCoupon(db.knex, ownerA, engineerA, {
        serial: "CS-0002",
        material: "carbon-steel",
        shape: "flush-disc",
        diameter_mm: "25",
        width_mm: "4",
        initial_mass_g: "5",
      }),
    );
    expect(extra.ok === false && extra.errors.width_mm).toMatch(/flush disc coupon has no width/);
    const both = await outcomeOf(
      createCoupon(db.knex, ownerA, engineerA, {
        serial: "CS-0002",
        ...strip,
        hole_diameter_mm: "13",
        initial_mass_g: "11,8342",
      }),
    );
    expect(both.ok === false && Object.keys(both.errors)).toEqual(["hole_diameter_mm", "initial_mass_g"]);
    expect(await count("coupons", { serial: "CS-0002" })).toBe(0);
  });

  it("checks mass, resolution and density by field, and needs a source for an overriding density", async () => {
    const r = await outcomeOf(
      createCoupon(db.knex, ownerA, engineerA, {
        serial: "CS 3",
        ...strip,
        initial_mass_g: "0.00001",
        balance_resolution_g: "abc",
      }),
    );
    expect(r.ok).toBe(false);
    if (!r.ok) {
      expect(r.errors.serial).toMatch(/no spaces/);
      expect(r.errors.initial_mass_g).toBe("The initial mass must be at least 0.0001 g.");
      expect(r.errors.balance_resolution_g).toBe("'abc' is not a number.");
    }
    const tooFine = await outcomeOf(
      createCoupon(db.knex, ownerA, engineerA, {
        serial: "CS-0003",
        ...strip,
        initial_mass_g: "11.83425",
      }),
    );
    expect(tooFine.ok === false && tooFine.errors.initial_mass_g).toMatch(/at most 4 decimals .*0\.1 mg/);
    const noSource = await outcomeOf(
      createCoupon(db.knex, ownerA, engineerA, {
        serial: "CS-0003",
        ...strip,
        density_g_cm3: "7.85",
      }),
    );
    expect(noSource.ok === false && noSource.errors.density_source).toMatch(/Say where the density 7.85/);
    const sourced = await outcomeOf(
      createCoupon(db.knex, ownerA, engineerA, {
        serial: "CS-0003",
        ...strip,
        density_g_cm3: "7.85",
        density_source: "Supplier certificate MC-2410-02",
      }),
    );
    expect(sourced.ok).toBe(true);
    const [row] = await db
      .knex("coupons")
      .where({ owner_id: ownerA, serial: "CS-0003" })
      .select("density_g_cm3", "density_source");
    expect(row).toEqual({ density_g_cm3: "7.850", density_source: "Supplier certificate MC-2410-02" });
  });

  it("refuses a serial already in stock as a field error; another owner has its own stock", async () => {
    const dup = await outcomeOf(createCoupon(db.knex, ownerA, engineerA, { serial: "CS-0001", ...strip }));
    expect(dup).toEqual({
      ok: false,
      errors: { serial: "The serial CS-0001 is already in your coupon stock; serials are unique." },
    });
    const theirs = await outcomeOf(createCoupon(db.knex, ownerB, engineerB, { serial: "CS-0001", ...strip }));
    expect(theirs.ok).toBe(true);
    expect((await listCoupons(db.knex, ownerB)).map((c) => c.serial)).toEqual(["CS-0001"]);
  });

  it("derives in stock / in service / removed from the coupon's exposure", async () => {
    const p = await plant(ownerA, engineerA, "STK");
    const point = await outcomeOf(
      createPoint(db.knex, ownerA, engineerA, p.siteId, {
        circuit_id: p.circuitId,
        tag: "STK-1",
        mounting: "flush",
      }),
    );
    const point2 = await outcomeOf(
      createPoint(db.knex, ownerA, engineerA, p.siteId, {
        circuit_id: p.circuitId,
        tag: "STK-2",
        mounting: "flush",
      }),
    );
    const a = await outcomeOf(createCoupon(db.knex, ownerA, engineerA, { serial: "ST-1", ...strip }));
    const b = await outcomeOf(createCoupon(db.knex, ownerA, engineerA, { serial: "ST-2", ...strip }));
    if (!point.ok || !point2.ok || !a.ok || !b.ok) throw new Error("setup");
    await db.knex("coupon_exposures").insert([
      { owner_id: ownerA, point_id: point.id, coupon_id: a.id, installed_at: "2026-01-05T10:00:00Z" },
      {
        owner_id: ownerA,
        point_id: point2.id,
        coupon_id: b.id,
        installed_at: "2025-10-01T10:00:00Z",
        removed_at: "2026-01-02T09:00:00Z",
      },
    ]);
    const bySerial = new Map((await listCoupons(db.knex, ownerA)).map((c) => [c.serial, c]));
    expect(bySerial.get("ST-1")).toMatchObject({ status: "in_service", point_tag: "STK-1", site_code: "STK" });
    expect(bySerial.get("ST-2")).toMatchObject({ status: "removed", point_tag: "STK-2" });
    expect(bySerial.get("CS-0001")).toMatchObject({ status: "in_stock", point_tag: null });
    expect((await listPoints(db.knex, ownerA, p.siteId)).find((r) => r.tag === "STK-1")?.coupon_serial).toBe("ST-1");
    expect((await listSetupSites(db.knex, ownerA)).find((s) => s.id === p.siteId)?.coupons_in_service).toBe(1);
  });
});

describe("coupon CSV import", () => {
  const header =
    "serial,material,shape,length_mm,width_mm,thickness_mm,diameter_mm,hole_diameter_mm,exposed_ends,initial_mass_g,balance_resolution_g,lot,certificate";

  it("imports a spreadsheet export with a BOM, CRLF line ends and a quoted comma", async () => {
    const csv =
      "\uFEFF" +
      [
        header,
        'IM-001,carbon-steel,strip,76.2,12.7,1.6,,6.4,,11.8342,0.0001,"L-24, batch 2",MC-1',
        "IM-002,S31603,disc,,,3.18,31.75,7.9,,17.5021,,L-25,",
        "",
        "IM-003,carbon-steel,rod,50,,,6.35,,2,12.1011,,,",
      ].join("\r\n") +
      "\r\n";
    const before = await count("audit_events", { record_type: "coupon" });
    const r = await outcomeOf<CsvImportResult, CsvRefusal>(importCoupons(db.knex, ownerA, engineerA, csv));
    expect(r).toEqual({ ok: true, count: 3, serials: ["IM-001", "IM-002", "IM-003"] });
    const rows = (await listCoupons(db.knex, ownerA)).filter((c) => c.serial.startsWith("IM-"));
    expect(rows.map((c) => [c.serial, c.material_code, c.shape, c.lot])).toEqual([
      ["IM-001", "carbon-steel", "strip", "L-24, batch 2"],
      ["IM-002", "ss-316l", "disc", "L-25"],
      ["IM-003", "carbon-steel", "rod", ""],
    ]);
    expect(rows[2].exposed_ends).toBe(2);
    expect(await count("audit_events", { record_type: "coupon" })).toBe(before + 3);

    // The stock page pages on the server, with the count of every match, a state and a search.
    const first = await couponsPage(db.knex, ownerA, { state: "in_stock", search: "im-" }, { number: 1, size: 2 });
    expect([first.total, first.number, first.items.map((c) => c.serial)]).toEqual([3, 1, ["IM-001", "IM-002"]]);
    const second = await couponsPage(db.knex, ownerA, { state: "in_stock", search: "IM-" }, { number: 2, size: 2 });
    expect(second.items.map((c) => c.serial)).toEqual(["IM-003"]);
    // A page past the end shows the last; a search's wildcard characters are taken as typed.
    expect((await couponsPage(db.knex, ownerA, { state: "", search: "IM-" }, { number: 9, size: 2 })).number).toBe(2);
    expect((await couponsPage(db.knex, ownerA, { state: "", search: "%" }, { number: 1, size: 50 })).total).toBe(0);
    expect(
      (await couponsPage(db.knex, ownerA, { state: "removed", search: "IM-" }, { number: 1, size: 2 })).total,
    ).toBe(0);
    const [event] = await listAudit(db.knex, ownerA, { recordType: "coupon", recordId: rows[0].id });
    expect(event.reason).toBe("CSV import of 3 coupons");
  });

  it("says which line and column uses a decimal comma, and writes nothing when one row is bad", async () => {
    const csv = [
      header,
      "DC-001,carbon-steel,strip,76.2,12.7,1.6,,6.4,,11.8342,,,",
      "DC-002,carbon-steel,strip,76.2,12.7,1.6,,6.4,,11.8343,,,",
      'DC-003,carbon-steel,strip,76.2,12.7,1.6,,6.4,,"12,3456",,,',
      "DC-004,carbon-steel,strip,76.2,12.7,1.6,,13,,11.8344,,,",
    ].join("\n");
    const before = await count("coupons", { owner_id: ownerA });
    const auditBefore = await count("audit_events", { owner_id: ownerA });
    const r = await outcomeOf<CsvImportResult, CsvRefusal>(importCoupons(db.knex, ownerA, engineerA, csv));
    expect(r.ok).toBe(false);
    if (r.ok) return;
    expect(r.problems.map(describeProblem)).toEqual([
      "line 4, initial_mass_g: '12,3456' uses a decimal comma; write 12.3456 with a point.",
      "line 5, hole_diameter_mm: The hole diameter must be less than the width of 12.7 mm (you gave 13 mm): the hole would be wider than the strip.",
    ]);
    expect(r.problems[0]).toMatchObject({ line: 4, column: "initial_mass_g", value: "12,3456" });
    expect(await count("coupons", { owner_id: ownerA })).toBe(before);
    expect(await count("audit_events", { owner_id: ownerA })).toBe(auditBefore);
  });

  it("reports every problem of a line at once, and a repeated serial even on a line with other problems", async () => {
    const csv = [
      header,
      "MX-001,brass,strip,76.2,12.7,,,6.4,,11.8342,,,",
      "MX-001,carbon-steel,disc,,,3,20,25,,abc,,,",
    ].join("\n");
    const r = await outcomeOf<CsvImportResult, CsvRefusal>(importCoupons(db.knex, ownerA, engineerA, csv));
    expect(r.ok === false && r.problems.map((p) => [p.line, p.column])).toEqual([
      [2, "material"],
      [2, "thickness_mm"],
      [3, "serial"],
      [3, "hole_diameter_mm"],
      [3, "initial_mass_g"],
    ]);
  });

  it("reads a semicolon-separated file from a decimal-comma spreadsheet and explains the commas", async () => {
    const csv = ["serial;material;shape;diameter_mm;initial_mass_g", "SC-001;carbon-steel;flush-disc;25,4;4,2107"].join(
      "\r\n",
    );
    const r = await outcomeOf<CsvImportResult, CsvRefusal>(importCoupons(db.knex, ownerA, engineerA, csv));
    expect(r.ok === false && r.problems.map(describeProblem)).toEqual([
      "line 2, diameter_mm: '25,4' uses a decimal comma; write 25.4 with a point.",
      "line 2, initial_mass_g: '4,2107' uses a decimal comma; write 4.2107 with a point.",
    ]);
  });

  it("names the line of a serial already in stock and of one repeated in the file", async () => {
    const csv = [
      header,
      "NEW-1,carbon-steel,strip,76.2,12.7,1.6,,6.4,,11.8342,,,",
      "CS-0001,carbon-steel,strip,76.2,12.7,1.6,,6.4,,11.8342,,,",
      "NEW-1,carbon-steel,strip,76.2,12.7,1.6,,6.4,,11.8342,,,",
    ].join("\n");
    const r = await outcomeOf<CsvImportResult, CsvRefusal>(importCoupons(db.knex, ownerA, engineerA, csv));
    expect(r.ok === false && r.problems).toEqual([
      {
        line: 3,
        column: "serial",
        value: "CS-0001",
        message: "The serial CS-0001 is already in your coupon stock; serials are unique.",
      },
      { line: 4, column: "serial", value: "NEW-1", message: "The serial NEW-1 is already on line 2 of this file." },
    ]);
    expect(await count("coupons", { owner_id: ownerA, serial: "NEW-1" })).toBe(0);
  });

  it("explains header problems, an empty file, unclosed quotes and stray values", async () => {
    const unknown = await outcomeOf<CsvImportResult, CsvRefusal>(
      importCoupons(db.knex, ownerA, engineerA, "serial,material,shape,mass\nX,carbon-steel,strip,1"),
    );
    expect(unknown.ok === false && unknown.problems.map((p) => [p.line, p.column])).toEqual([
      [1, "mass"],
      [1, "initial_mass_g"],
    ]);
    const empty = await outcomeOf<CsvImportResult, CsvRefusal>(
      importCoupons(db.knex, ownerA, engineerA, "\uFEFF  \r\n"),
    );
    expect(empty.ok === false && empty.problems[0].message).toMatch(/The file is empty/);
    const onlyHeader = await outcomeOf<CsvImportResult, CsvRefusal>(
      importCoupons(db.knex, ownerA, engineerA, `${header}\r\n`),
    );
    expect(onlyHeader.ok === false && onlyHeader.problems[0].message).toMatch(/no coupons below it/);
    const quote = await outcomeOf<CsvImportResult, CsvRefusal>(
      importCoupons(
        db.knex,
        ownerA,
        engineerA,
        `${header}\nQ-1,carbon-steel,strip,76.2,12.7,1.6,,6.4,,11.8342,,"open lot,\n`,
      ),
    );
    expect(quote.ok === false && quote.problems[0].message).toMatch(/quoted value is never closed/);
    const stray = await outcomeOf<CsvImportResult, CsvRefusal>(
      importCoupons(
        db.knex,
        ownerA,
        engineerA,
        "serial,material,shape,diameter_mm,initial_mass_g\nS-1,carbon-steel,flush-disc,25,4.2107,L-24, batch 2",
      ),
    );
    expect(stray.ok === false && describeProblem(stray.problems[0])).toMatch(
      /^line 2: This line has 7 values but the header has 5 columns/,
    );
  });

  it("serves a template that imports as it stands", async () => {
    const template = couponCsvTemplate();
    expect(template.split("\r\n")[0]).toBe(
      "serial,material,shape,length_mm,width_mm,thickness_mm,diameter_mm,hole_diameter_mm,exposed_ends,initial_mass_g,balance_resolution_g,density_g_cm3,density_source,lot,certificate",
    );
    const r = await outcomeOf<CsvImportResult, CsvRefusal>(importCoupons(db.knex, ownerB, engineerB, template));
    expect(r).toMatchObject({ ok: true, count: 3 });
  });
});

describe("owner settings", () => {
  it("asks for a photo of every coupon when ticked, and names the field for a value that is not a tick", async () => {
    const ticked = await outcomeOf(
      saveOwnerSettings(db.knex, ownerB, engineerB, { minimum_exposure_days: "30", photos_required: "on" }),
    );
    expect(ticked.ok && ticked.settings.photosRequired).toBe(true);
    const refused = await outcomeOf(
      saveOwnerSettings(db.knex, ownerB, engineerB, { minimum_exposure_days: "30", photos_required: "maybe" }),
    );
    expect(refused.ok ? null : refused.errors.photos_required).toBe("Tick the box or leave it empty.");
    expect((await ownerSettings(db.knex, ownerB)).photosRequired).toBe(true);
    await saveOwnerSettings(db.knex, ownerB, engineerB, { minimum_exposure_days: "30", photos_required: "off" });
    expect((await ownerSettings(db.knex, ownerB)).photosRequired).toBe(false);
    await db.knex("owner_settings").where({ owner_id: ownerB }).delete();
  });

  it("starts on the SP0775 defaults and a 30-day minimum exposure", async () => {
    expect(await ownerSettings(db.knex, ownerA)).toEqual({
      minimumExposureDays: 30,
      photosRequired: false,
      familyThresholds: {},
      ...LIFE_POLICY_DEFAULTS,
    });
  });

  it("stores thresholds in mm/y, updates them in place, and audits each change", async () => {
    const first = await outcomeOf(
      saveOwnerSettings(db.knex, ownerA, engineerA, {
        general_moderate: "0.025",
        general_high: "0.125",
        general_severe: "0.25",
        pitting_moderate: "",
        pitting_high: "",
        pitting_severe: "",
        minimum_exposure_days: "45",
      }),
    );
    expect(first.ok).toBe(true);
    expect(await ownerSettings(db.knex, ownerA)).toEqual({
      generalThresholds: { moderate: 0.025, high: 0.125, severe: 0.25 },
      minimumExposureDays: 45,
      photosRequired: false,
      familyThresholds: {},
      ...LIFE_POLICY_DEFAULTS,
    });
    const second = await outcomeOf(
      saveOwnerSettings(db.knex, ownerA, engineerA, {
        general_moderate: "0.025",
        general_high: "0.125",
        general_severe: "0.25",
        pitting_moderate: "0.13",
        pitting_high: "0.2",
        pitting_severe: "0.38",
        minimum_exposure_days: "45",
      }),
    );
    expect(second.ok && second.changed).toBe(true);
    expect(await count("owner_settings", { owner_id: ownerA })).toBe(1);
    expect((await ownerSettings(db.knex, ownerA)).pittingThresholds).toEqual({
      moderate: 0.13,
      high: 0.2,
      severe: 0.38,
    });
    const unchanged = await outcomeOf(
      saveOwnerSettings(db.knex, ownerA, engineerA, {
        general_moderate: "0.025",
        general_high: "0.125",
        general_severe: "0.25",
        pitting_moderate: "0.13",
        pitting_high: "0.2",
        pitting_severe: "0.38",
        minimum_exposure_days: "45",
      }),
    );
    expect(unchanged.ok && unchanged.changed).toBe(false);
    const trail = await listAudit(db.knex, ownerA, { recordType: "owner_settings", recordId: ownerA });
    expect(trail.map((e) => e.action)).toEqual(["owner_settings.updated", "owner_settings.updated"]);
    expect(trail[1].before).toBeNull();
    expect(trail[0].before).toEqual({
      generalThresholds: { moderate: 0.025, high: 0.125, severe: 0.25 },
      minimumExposureDays: 45,
      photosRequired: false,
    });

    const cleared = await outcomeOf(saveOwnerSettings(db.knex, ownerA, engineerA, { minimum_exposure_days: "" }));
    expect(cleared.ok).toBe(true);
    expect(await ownerSettings(db.knex, ownerA)).toEqual({
      minimumExposureDays: 30,
      photosRequired: false,
      familyThresholds: {},
      ...LIFE_POLICY_DEFAULTS,
    });
    expect(await ownerSettings(db.knex, ownerB)).toEqual({
      minimumExposureDays: 30,
      photosRequired: false,
      familyThresholds: {},
      ...LIFE_POLICY_DEFAULTS,
    });
  });

  it("refuses partial, disordered and out-of-range values per field", async () => {
    const r = await outcomeOf(
      saveOwnerSettings(db.knex, ownerB, engineerB, {
        general_moderate: "0.2",
        general_high: "0.1",
        general_severe: "0.3",
        pitting_moderate: "0.1",
        pitting_high: "",
        pitting_severe: "",
        minimum_exposure_days: "400",
      }),
    );
    expect(r.ok).toBe(false);
    if (r.ok) return;
    expect(r.errors.minimum_exposure_days).toBe("The minimum exposure must be a whole number from 1 to 365 days.");
    const severeBelowHigh = await outcomeOf(
      saveOwnerSettings(db.knex, ownerB, engineerB, {
        general_moderate: "0.1",
        general_high: "0.2",
        general_severe: "0.15",
        pitting_moderate: "0.1",
        pitting_high: "",
        pitting_severe: "",
      }),
    );
    expect(severeBelowHigh.ok === false && severeBelowHigh.errors).toEqual({
      general_severe: "Severe-above must be at least high-from (0.2 mm/y).",
      pitting_high: "Fill in all three pitting thresholds, or leave all three empty for the SP0775 defaults.",
      pitting_severe: "Fill in all three pitting thresholds, or leave all three empty for the SP0775 defaults.",
    });
    const disordered = await outcomeOf(
      saveOwnerSettings(db.knex, ownerB, engineerB, {
        general_moderate: "0.2",
        general_high: "0.1",
        general_severe: "0.3",
      }),
    );
    expect(disordered.ok === false && disordered.errors).toEqual({
      general_high: "High-from must be greater than moderate-from (0.2 mm/y).",
    });
    const comma = await outcomeOf(
      saveOwnerSettings(db.knex, ownerB, engineerB, {
        general_moderate: "0,1",
        general_high: "0.2",
        general_severe: "0.3",
      }),
    );
    expect(comma.ok === false && comma.errors.general_moderate).toBe(
      "'0,1' uses a decimal comma; write 0.1 with a point.",
    );
    expect(await count("owner_settings", { owner_id: ownerB })).toBe(0);
  });
});

describe("who may set up", () => {
  const args = (role: Role, kind: "owner" | "contractor") => {
    const context = new RouterContextProvider();
    const user: SessionUser = {
      id: "00000000-0000-4000-8000-000000000001",
      email: "someone@example.test",
      name: "Someone",
      role,
      units: "si",
      timeZone: "UTC",
      timeZoneChosen: false,
      organisation: { id: kind === "owner" ? ownerA : contractor, name: "Org", kind },
      sessionIdHash: "x",
    };
    context.set(userContext, user);
    return { request: new Request("http://127.0.0.1/setup"), context };
  };
  const statusOf = (fn: () => unknown) => {
    try {
      fn();
      return 200;
    } catch (thrown) {
      return (thrown as { init?: { status?: number } }).init?.status ?? (thrown as Response).status;
    }
  };

  it("lets integrity engineers and administrators in, and refuses plant managers and contractors", () => {
    expect(statusOf(() => requireOwnerUser(args("integrity_engineer", "owner"), "setUpSites"))).toBe(200);
    expect(statusOf(() => requireOwnerUser(args("administrator", "owner"), "setUpSites"))).toBe(200);
    expect(statusOf(() => requireOwnerUser(args("plant_manager", "owner"), "setUpSites"))).toBe(403);
    expect(statusOf(() => requireOwnerUser(args("contractor_technician", "contractor"), "setUpSites"))).toBe(403);
  });
});

describe("thresholds per material family", () => {
  it("stores, replaces and removes an owner's thresholds for another family, with audit events, per owner", async () => {
    const { familyThresholds, removeFamilyThreshold, saveFamilyThreshold } =
      await import("../../app/models/owner-settings.server");
    // Invented owner thresholds (demo-style values, not from a standard).
    await saveFamilyThreshold(db.knex, ownerA, engineerA, {
      family: "stainless-steel",
      kind: "general",
      moderate: "0.01",
      high: "0.05",
      severe: "0.1",
    });
    expect(await familyThresholds(db.knex, ownerA)).toEqual({
      "stainless-steel": { general: { moderate: 0.01, high: 0.05, severe: 0.1 } },
    });
    expect(await familyThresholds(db.knex, ownerB)).toEqual({});
    await saveFamilyThreshold(db.knex, ownerA, engineerA, {
      family: "stainless-steel",
      kind: "general",
      moderate: "0.02",
      high: "0.05",
      severe: "0.1",
    });
    expect((await familyThresholds(db.knex, ownerA))["stainless-steel"]?.general?.moderate).toBe(0.02);
    expect((await ownerSettings(db.knex, ownerA)).familyThresholds["stainless-steel"]?.general?.high).toBe(0.05);

    const bad = await outcomeOf(
      saveFamilyThreshold(db.knex, ownerA, engineerA, { family: "carbon-steel", kind: "sideways", moderate: "0,1" }),
    );
    expect(bad.ok === false && bad.errors).toMatchObject({
      family: expect.stringMatching(/carbon steel is set above/),
      kind: expect.stringMatching(/general or pitting/),
      moderate: expect.stringMatching(/decimal comma/),
    });
    const unordered = await outcomeOf(
      saveFamilyThreshold(db.knex, ownerA, engineerA, {
        family: "titanium",
        kind: "pitting",
        moderate: "0.2",
        high: "0.1",
        severe: "0.3",
      }),
    );
    expect(unordered.ok === false && unordered.errors.high).toMatch(/greater than moderate-from/);

    await removeFamilyThreshold(db.knex, ownerA, engineerA, { family: "stainless-steel", kind: "general" });
    expect(await familyThresholds(db.knex, ownerA)).toEqual({});
    await expect(
      removeFamilyThreshold(db.knex, ownerA, engineerA, { family: "stainless-steel", kind: "general" }),
    ).rejects.toBeInstanceOf(NotFoundInTenant);
    const events = await db
      .knex("audit_events")
      .where({ owner_id: ownerA, record_type: "owner_settings" })
      .select("after");
    expect(events.length).toBeGreaterThanOrEqual(3);
  });
});
