import type { Express } from "express";
import request from "supertest";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { productionApp, shutdownApp } from "../helpers/app";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, type World } from "../helpers/fixtures";
import { sessionCookieFor } from "../helpers/session";

/** The exchange form and the lab form through the real request handler: every problem in one round, typed text kept. */

let db: TestDatabase;
let app: Express;
let w: World;
let tech: string;
let exposureId: string;

const body = (fields: Array<[string, string]>) => new URLSearchParams(fields).toString();
/** The page as a reader sees it: entities decoded. */
const words = (html: string) =>
  html
    .replace(/&#x27;/g, "'")
    .replace(/&quot;/g, '"')
    .replace(/&lt;/g, "<")
    .replace(/&gt;/g, ">")
    .replace(/&amp;/g, "&");
const counts = async () => ({
  exposures: (await db.knex("coupon_exposures").count({ n: "*" }).first())?.n,
  results: (await db.knex("coupon_results").count({ n: "*" }).first())?.n,
  submissions: (await db.knex("submissions").count({ n: "*" }).first())?.n,
  audit: (await db.knex("audit_events").count({ n: "*" }).first())?.n,
});

beforeAll(async () => {
  db = await createTestDatabase();
  process.env.DATABASE_URL = db.url;
  app = await productionApp();
  w = await buildWorld(db.knex);
  tech = await sessionCookieFor(db.knex, w.users.tech.id);
  // a strip coupon (76.2 × 19.05 × 3.18 mm, 36.1234 g) 90 days in service at CP-2, removed yesterday
  const couponId = await w.coupon("LAB-1");
  [{ id: exposureId }] = await db
    .knex("coupon_exposures")
    .insert({
      owner_id: w.owner.id,
      point_id: w.point2,
      coupon_id: couponId,
      installed_at: db.knex.raw("now() - interval '91 days'"),
      installed_by: w.users.tech.id,
      installed_by_organisation_id: w.monitoring.id,
      removed_at: db.knex.raw("now() - interval '1 day'"),
      removed_by: w.users.tech.id,
      removed_by_organisation_id: w.monitoring.id,
    })
    .returning("id");
});
afterAll(async () => {
  await shutdownApp();
  await db?.drop();
});

describe("the exchange form", () => {
  it("names every bad field of one body in one answer and writes nothing", async () => {
    await w.coupon("STOCK-1");
    const before = await counts();
    const res = await request(app)
      .post(`/pulls/${w.point}/exchange`)
      .set("Cookie", tech)
      .type("form")
      .send(
        body([
          ["pittingVisible", "perhaps"],
          ["deposits", "d".repeat(501)],
          ["notes", "n".repeat(2001)],
          ["installSerial", "STOCK-1"],
          ["installedAt", "2026-02-30T10:00"],
        ]),
      )
      .expect(400);
    const page = words(res.text);
    expect(page).toContain("Say whether pitting was visible: yes, no, or not recorded.");
    expect(page).toContain("Keep the deposits to 500 characters.");
    expect(page).toContain("Keep the notes to 2000 characters.");
    expect(page).toContain("Enter a date and time, such as 2026-11-03 14:20.");
    expect(page).toContain('value="2026-02-30T10:00"'); // what was typed stays
    expect(await counts()).toEqual(before);
  });
});

describe("the lab form", () => {
  it("names every bad field of one body in one answer, keeps what was typed and writes nothing", async () => {
    const before = await counts();
    const res = await request(app)
      .post(`/lab/${exposureId}`)
      .set("Cookie", tech)
      .type("form")
      .send(
        body([
          ["cleaningMethod", "c".repeat(201)],
          ["massLossMethod", ""],
          ["couponMass", "35.80"],
          ["couponMass", "35.90"], // went up after cleaning
          ["couponMass", ""],
          ["blankMass", "36.19"],
          ["blankMass", ""],
          ["blankMass", ""],
          ["finalMassG", "35.70"], // and a final mass as well, with no method chosen
          ["blankInitialMassG", "36,20"],
          ["pitDepthsMm", "0,35; 0.30"],
          ["labNotes", ""],
        ]),
      )
      .expect(400);
    const page = words(res.text);
    expect(page).toContain("Keep the cleaning method under 200 characters.");
    expect(page).toContain("Both a final mass and masses after cleaning cycles are entered");
    expect(page).toContain("Blank mass before cleaning: '36,20' uses a decimal comma; write 36.20 with a point.");
    expect(page).toContain("Pit depths: 0,35 — use a point as the decimal mark (0.35).");
    expect(page).toContain('value="35.90"');
    expect(page).toContain('value="0,35; 0.30"');
    expect(await counts()).toEqual(before);

    // the calculation's checks come in the same round as the parser's
    const second = await request(app)
      .post(`/lab/${exposureId}`)
      .set("Cookie", tech)
      .type("form")
      .send(
        body([
          ["massLossMethod", "last-cycle"],
          ["couponMass", "35.80"],
          ["couponMass", "35.90"],
          ["blankInitialMassG", "36.20"],
          ["blankMass", "36.19"],
          ["pitDepthsMm", "0,35"],
          ["labNotes", "l".repeat(4001)],
        ]),
      )
      .expect(400);
    const again = words(second.text);
    expect(again).toContain("the mass went up after cleaning");
    expect(again).toContain("The blank has 1 cycle(s) but the coupon has 2");
    expect(again).toContain("Pit depths: 0,35 — use a point as the decimal mark (0.35).");
    expect(again).toContain("Keep lab notes under 4000 characters.");
    expect(await counts()).toEqual(before);
  });

  it("saves with the method chosen and shows the saved numbers as they were typed when reopened", async () => {
    await request(app)
      .post(`/lab/${exposureId}`)
      .set("Cookie", tech)
      .type("form")
      .send(
        body([
          ["massLossMethod", "final-mass"],
          ["couponMass", "35.8100"],
          ["finalMassG", "35.80"],
          ["pitDepthsMm", "0.30, 0.20\n0.10"],
        ]),
      )
      .expect(302);
    const row = await db.knex("coupon_results").where({ exposure_id: exposureId }).first("inputs", "final_mass_g");
    expect(row.inputs.lab).toMatchObject({ finalMassG: 35.8, couponMassesG: [], pitDepthsMm: [0.3, 0.2, 0.1] });
    expect(row.inputs.text).toMatchObject({ finalMassG: "35.80", pitDepthsMm: "0.30, 0.20\n0.10" });
    const reopened = words((await request(app).get(`/lab/${exposureId}`).set("Cookie", tech).expect(200)).text);
    expect(reopened).toContain('value="35.80"');
    expect(reopened).toContain('value="0.30, 0.20\n0.10"');
    expect(reopened).toContain("Final mass after cleaning");
    expect(reopened).toContain("not used: the rate uses the final mass");
  });
});
