import type { Express } from "express";
import request from "supertest";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { CAUTION_LEAD } from "../../app/services/caution";
import { productionApp, shutdownApp } from "../helpers/app";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, createCircuit, type World } from "../helpers/fixtures";
import { sessionCookieFor } from "../helpers/session";

/** The circuit form's design data through the real request handler, and what the set-up page shows. */

let db: TestDatabase;
let app: Express;
let w: World;
let engineer: string;
let foreignEngineer: string;
let circuitId: string;
let unitId: string;

const body = (fields: Array<[string, string]>) => new URLSearchParams(fields).toString();

/** Invented NPS 4 Sch 80 line. */
const design: Array<[string, string]> = [
  ["nps", "4"],
  ["schedule", "80"],
  ["outside_diameter_mm", "114.3"],
  ["nominal_wall_mm", "8.56"],
  ["design_pressure_mpa", "9.5"],
  ["design_temperature_c", "120"],
  ["allowable_stress_mpa", "138"],
  ["joint_factor_e", "1"],
  ["weld_factor_w", ""],
  ["y_coefficient", ""],
  ["corrosion_allowance_mm", "3"],
  ["piping_class", "2"],
];
const form = (extra: Array<[string, string]>) =>
  body([
    ["intent", "updateCircuit"],
    ["id", circuitId],
    ["unit_id", unitId],
    ["tag", "DD-77"],
    ["material", "carbon-steel"],
    ["service", "sour water"],
    ...extra,
  ]);

beforeAll(async () => {
  db = await createTestDatabase();
  process.env.DATABASE_URL = db.url;
  app = await productionApp();
  w = await buildWorld(db.knex);
  engineer = await sessionCookieFor(db.knex, w.users.engineer.id);
  foreignEngineer = await sessionCookieFor(db.knex, w.users.engineer2.id);
  circuitId = await createCircuit(db.knex, w.site, { unitTag: "U-7", circuitTag: "DD-77" });
  unitId = (await db.knex("circuits").where({ id: circuitId }).first("unit_id")).unit_id;
});
afterAll(async () => {
  await shutdownApp();
  await db?.drop();
});

describe("circuit design data on the set-up page", () => {
  it("says what is missing while the circuit has no design data", async () => {
    const page = await request(app).get(`/setup/sites/${w.site.id}`).set("Cookie", engineer).expect(200);
    expect(page.text).toContain("Not yet known: missing design pressure, outside diameter, allowable stress S");
  });

  it("refuses bad fields with a message each, keeping the row as it was", async () => {
    const before = await db.knex("circuits").where({ id: circuitId }).first();
    const res = await request(app)
      .post(`/setup/sites/${w.site.id}?circuit=${circuitId}`)
      .set("Cookie", engineer)
      .type("form")
      .send(
        form([
          ["design_pressure_mpa", "9.5"],
          ["joint_factor_e", "0"],
          ["structural_minimum_mm", "3"],
        ]),
      )
      .expect(400);
    // React separates text and expressions with empty comments.
    expect(res.text.replaceAll("<!-- -->", "")).toContain("Nothing was saved: 5 fields need attention.");
    expect(res.text).toContain("Enter the outside diameter in mm");
    expect(res.text).toContain("The joint quality factor E must be more than 0.");
    expect(res.text).toContain("Say why this structural minimum is used");
    expect(res.text).toContain("Enter the design temperature in °C, or the coefficient Y");
    expect(await db.knex("circuits").where({ id: circuitId }).first()).toEqual(before);
  });

  it("is a 404 for another owner's engineer", async () => {
    await request(app)
      .post(`/setup/sites/${w.foreignSite.id}`)
      .set("Cookie", foreignEngineer)
      .type("form")
      .send(form(design))
      .expect(404);
  });

  it("shows the worked example's required thickness, what governed it and the caution", async () => {
    await request(app)
      .post(`/setup/sites/${w.site.id}?circuit=${circuitId}`)
      .set("Cookie", engineer)
      .type("form")
      .send(form(design))
      .expect(302);
    const page = await request(app).get(`/setup/sites/${w.site.id}`).set("Cookie", engineer).expect(200);
    // ASME B31.3 eq. (3a) t = P·D / (2(S·E·W + P·Y)) [published standard], P 9.5 MPa, D 114.3 mm,
    // S 138 MPa, E 1, W 1 (the default), Y 0.4 (ferritic steel ≤ 482 °C, B31.3 Table 304.1.1)
    // [published standard]: 1085.85 / 283.6 = 3.8288 mm, above the API 574 structural minimum
    // for NPS 4 carbon steel, 2.29 mm [from memory].
    const t = (9.5 * 114.3) / (2 * (138 * 1 * 1 + 9.5 * 0.4));
    expect(t.toFixed(3)).toBe("3.829");
    expect(page.text).toContain(`${t.toFixed(3)} mm (${(t / 25.4).toFixed(4)} in)`);
    expect(page.text).toContain("3.829 mm (0.1507 in)");
    expect(page.text).toContain("Pressure design, B31.3 eq. 3a (Y 0.4 from Table 304.1.1); structural minimum 2.29 mm");
    expect(page.text).toContain("Corrosion allowance 3.000 mm, not included.");
    expect(page.text).toContain(CAUTION_LEAD);
  });
});
