import type { Express } from "express";
import request from "supertest";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { recomputeCircuitLife } from "../../app/models/circuit-life.server";
import { CAUTION } from "../../app/services/caution";
import { productionApp, shutdownApp } from "../helpers/app";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, type World } from "../helpers/fixtures";
import { sessionCookieFor } from "../helpers/session";

/** The circuits' remaining life as JSON, through the real request handler: who sees what, and bad queries. */

let db: TestDatabase;
let app: Express;
let w: World;
let circuitId: string;
let foreignCircuitId: string;

const get = async (path: string, userId: string) =>
  request(app)
    .get(path)
    .set("Cookie", await sessionCookieFor(db.knex, userId));

beforeAll(async () => {
  db = await createTestDatabase();
  process.env.DATABASE_URL = db.url;
  w = await buildWorld(db.knex);
  app = await productionApp();
  const [unit] = await db
    .knex("process_units")
    .insert({ site_id: w.site.id, tag: "U-9", description: "" })
    .returning("id");
  // NPS 6 Sch 40 (ASME B36.10M: D 168.3 mm, wall 7.11 mm); invented design inputs
  const [c] = await db
    .knex("circuits")
    .insert({
      unit_id: unit.id,
      site_id: w.site.id,
      tag: "L-9",
      material_code: "carbon-steel",
      nps: "6",
      outside_diameter_mm: 168.3,
      nominal_wall_mm: 7.11,
      design_pressure_mpa: 5,
      design_temperature_c: 200,
      allowable_stress_mpa: 137.9,
      joint_factor_e: 1,
      piping_class: 2,
    })
    .returning("id");
  circuitId = c.id;
  const [m] = await db
    .knex("cmls")
    .insert({
      owner_id: w.owner.id,
      circuit_id: circuitId,
      tag: "L-9-1",
      component: "elbow",
      baseline_thickness_mm: 7,
      baseline_on: "2016-03-01",
    })
    .returning("id");
  // two approved surveys, one reading each
  for (const [i, on, mm] of [
    [1, "2021-03-01", 6.5],
    [2, "2026-03-01", 6.0],
  ] as const) {
    const [s] = await db
      .knex("submissions")
      .insert({
        owner_id: w.owner.id,
        site_id: w.site.id,
        contractor_id: w.inspection.id,
        kind: "thickness",
        reference: `PA-SUB-T${i}`,
      })
      .returning("id");
    await db
      .knex("thickness_readings")
      .insert({ submission_id: s.id, cml_id: m.id, measured_on: on, thickness_mm: mm });
    await db.knex("submissions").where({ id: s.id }).update({ status: "submitted" });
    await db.knex("submissions").where({ id: s.id }).update({ status: "approved" });
  }
  foreignCircuitId = (
    await db
      .knex("circuits")
      .insert({
        unit_id: (
          await db
            .knex("process_units")
            .insert({ site_id: w.foreignSite.id, tag: "U-Z", description: "" })
            .returning("id")
        )[0].id,
        site_id: w.foreignSite.id,
        tag: "Z-9",
        material_code: "carbon-steel",
      })
      .returning("id")
  )[0].id;
  await db.knex.transaction((trx) =>
    recomputeCircuitLife(trx, { ownerId: w.owner.id, cause: "recompute", now: new Date("2026-06-01T12:00:00Z") }),
  );
});
afterAll(async () => {
  await shutdownApp();
  await db?.drop();
});

describe("GET /api/v1/circuits", () => {
  it("lists the owner's circuits for the engineer, the plant manager and the administrator", async () => {
    for (const user of [w.users.engineer, w.users.manager, w.users.admin]) {
      const res = await get("/api/v1/circuits?limit=1", user.id);
      expect(res.status, user.role).toBe(200);
      expect(res.body.items).toHaveLength(1);
      expect(res.body.nextCursor).toBe(res.body.items[0].id);
      expect(res.body.caution).toBe(CAUTION); // beside every remaining life and date
      const next = await get(`/api/v1/circuits?limit=200&cursor=${res.body.nextCursor}`, user.id);
      expect(next.body.items).toHaveLength(1);
      expect(next.body.nextCursor).toBeNull();
    }
    const all = await get(`/api/v1/circuits?siteId=${w.site.id}`, w.users.engineer.id);
    const line = all.body.items.find((i: { tag: string }) => i.tag === "L-9");
    expect(line.status.code).toBe("in_service");
    expect(line.nextInspectionOn).toBe("2036-03-01"); // class 2 maximum 10 y [pub], ISO date
    expect(typeof line.remainingLifeYears).toBe("number");
    const bare = all.body.items.find((i: { tag: string }) => i.tag === "C-1");
    expect(bare.remainingLifeYears).toBeNull();
    expect(bare.remainingLifeReason).toMatch(/design data missing/);
  });

  it("is not there for contractors, and another owner sees only its own", async () => {
    for (const user of [w.users.tech, w.users.inspector]) {
      const res = await get("/api/v1/circuits", user.id);
      expect(res.status).toBe(404);
      expect(res.headers["content-type"]).toContain("application/problem+json");
    }
    const foreign = await get("/api/v1/circuits", w.users.engineer2.id);
    expect(foreign.status).toBe(200);
    expect(foreign.body.items.map((i: { id: string }) => i.id)).toEqual([foreignCircuitId]);
    // a cursor from another owner's list is not one handed out to this caller
    const crossed = await get(`/api/v1/circuits?cursor=${circuitId}`, w.users.engineer2.id);
    expect(crossed.status).toBe(400);
  });

  it("refuses a limit outside 1–200 and a cursor it did not hand out, with problem+json", async () => {
    for (const q of ["limit=0", "limit=201", "limit=abc", "cursor=zzz", "siteId=nope"]) {
      const res = await get(`/api/v1/circuits?${q}`, w.users.engineer.id);
      expect(res.status, q).toBe(400);
      expect(res.headers["content-type"]).toContain("application/problem+json");
      expect(res.body.detail, q).toBeTruthy();
    }
  });
});

describe("GET /api/v1/circuits/:id", () => {
  it("gives the design data, required thickness, each CML's figures, basis, status and the caution", async () => {
    const res = await get(`/api/v1/circuits/${circuitId}`, w.users.manager.id);
    expect(res.status).toBe(200);
    expect(res.body.requiredThicknessNow.status).toBe("ok");
    expect(res.body.requiredThicknessNow.governedBy).toBe("pressure-design");
    expect(res.body.design.outsideDiameterMm).toBe(168.3);
    expect(res.body.cmls).toHaveLength(1);
    const cml = res.body.cmls[0];
    expect(cml.tag).toBe("L-9-1");
    // long-term (7.0 − 6.0)/(3652 d / 365.25) — API 570 [pub]
    expect(cml.longTermMmPerYear).toBeCloseTo(1 / (3652 / 365.25), 10);
    expect(cml.asOf).toBe("2026-03-01");
    expect(cml.nextInspectionOn).toMatch(/^\d{4}-\d{2}-\d{2}$/);
    expect(res.body.version).toBe(1);
    expect(res.body.basis.formulaVersion).toMatch(/^wallcast-calc /);
    expect(res.body.status.words).toBeTruthy();
    expect(res.body.caution).toBe(CAUTION);
  });

  it("is a 404 for contractors, another owner and malformed ids", async () => {
    expect((await get(`/api/v1/circuits/${circuitId}`, w.users.tech.id)).status).toBe(404);
    expect((await get(`/api/v1/circuits/${circuitId}`, w.users.engineer2.id)).status).toBe(404);
    expect((await get(`/api/v1/circuits/${foreignCircuitId}`, w.users.engineer.id)).status).toBe(404);
    expect((await get("/api/v1/circuits/not-a-uuid", w.users.engineer.id)).status).toBe(404);
  });
});
