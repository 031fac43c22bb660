import type { Express } from "express";
import request from "supertest";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { CAUTION_LEAD } from "../../app/services/caution";
import { productionApp, shutdownApp } from "../helpers/app";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, createCircuit, type World } from "../helpers/fixtures";
import { sessionCookieFor } from "../helpers/session";

/** The circuit page through the real request handler: who may see it, and its CML forms. */

let db: TestDatabase;
let app: Express;
let w: World;
let circuitId: string;
const cookies: Record<string, string> = {};

/** The page's text: tags and React's separators removed, entities of quotes restored. */
const text = (html: string) =>
  html
    .replaceAll("<!-- -->", "")
    .replace(/<[^>]+>/g, "")
    .replaceAll("&#x27;", "'");

beforeAll(async () => {
  db = await createTestDatabase();
  process.env.DATABASE_URL = db.url;
  app = await productionApp();
  w = await buildWorld(db.knex);
  for (const [k, u] of Object.entries(w.users)) cookies[k] = await sessionCookieFor(db.knex, u.id);
  circuitId = await createCircuit(db.knex, w.site, { unitTag: "U-8", circuitTag: "OVHD-8" });
  // Invented NPS 6 line: diameter and wall left to the pipe table, 12.5 % mill under-tolerance.
  await db.knex("circuits").where({ id: circuitId }).update({
    nps: "6",
    schedule: "40",
    outside_diameter_mm: 168.3,
    outside_diameter_from_table: true,
    nominal_wall_mm: 7.11,
    nominal_wall_from_table: true,
    mill_tolerance_pct: 12.5,
  });
});
afterAll(async () => {
  await shutdownApp();
  await db?.drop();
});

const page = (who: string) => request(app).get(`/setup/circuits/${circuitId}`).set("Cookie", cookies[who]);
const send = (who: string, fields: Record<string, string>, query = "") =>
  request(app)
    .post(`/setup/circuits/${circuitId}${query}`)
    .set("Cookie", cookies[who])
    .type("form")
    .send(new URLSearchParams(fields).toString());

describe("the circuit page", () => {
  it("shows the owner's engineer the design data with where the dimensions came from, and the caution", async () => {
    const res = await page("engineer").expect(200);
    const t = text(res.text);
    expect(t).toContain("Circuit OVHD-8");
    expect(t).toContain("168.3 mm from NPS 6 (ASME B36.10M)");
    expect(t).toContain("7.11 mm from NPS 6 Sch 40 (ASME B36.10M)");
    expect(t).toContain("No CMLs yet");
    expect(t).toContain(CAUTION_LEAD);
  });

  it("is a 403 for a plant manager and a 404 for contractors and another owner", async () => {
    await page("admin").expect(200);
    await page("manager").expect(403);
    await page("tech").expect(404);
    await page("inspector").expect(404);
    await page("engineer2").expect(404);
    await send("inspector", { intent: "createCml", tag: "X-1", component: "pipe" }).expect(404);
    expect(await db.knex("cmls").count<{ n: string }[]>({ n: "*" })).toEqual([{ n: "0" }]);
  });

  it("adds a CML and lists it with its effective base-line", async () => {
    await send("engineer", {
      intent: "createCml",
      tag: "OVHD-8-E1",
      location: "first elbow",
      component: "elbow",
      injection_point: "off",
      baseline_thickness_mm: "",
      baseline_on: "",
    }).expect(302);
    const t = text((await page("engineer").expect(200)).text);
    expect(t).toContain("OVHD-8-E1");
    // 7.11 × (1 − 0.125) = 6.22 mm, from the definition of a mill under-tolerance.
    expect(t).toContain("6.22 mm (nominal 7.11 mm less 12.5 % mill tolerance)");
    expect(t).toContain("None yet");
  });

  it("keeps what was typed and names the field on a bad CML, and on a tag the owner already uses", async () => {
    const res = await send("engineer", {
      intent: "createCml",
      tag: "OVHD-8-E2",
      location: "second elbow",
      component: "elbow",
      baseline_thickness_mm: "6,9",
    }).expect(400);
    const t = text(res.text);
    expect(t).toContain("Nothing was saved: one field needs attention.");
    expect(t).toMatch(/decimal comma|use a point/);
    expect(res.text).toContain('value="second elbow"');
    const dup = await send("engineer", { intent: "createCml", tag: "OVHD-8-E1", component: "pipe" }).expect(400);
    expect(text(dup.text)).toContain("This owner already has a CML tagged OVHD-8-E1.");
  });

  it("records a replaced component on the CML and lists it by date", async () => {
    const cml = await db.knex("cmls").where({ tag: "OVHD-8-E1" }).first("id");
    const on = new Date(Date.now() - 20 * 86_400_000).toISOString().slice(0, 10);
    const bad = await send(
      "engineer",
      { intent: "replaceComponent", id: cml.id, replaced_on: on, reason: "x" },
      `?cml=${cml.id}`,
    ).expect(400);
    expect(text(bad.text)).toContain("at least 3 characters");
    await send(
      "engineer",
      {
        intent: "replaceComponent",
        id: cml.id,
        replaced_on: on,
        reason: "Elbow renewed",
        baseline_thickness_mm: "7.3",
      },
      `?cml=${cml.id}`,
    ).expect(302);
    const t = text(
      (await request(app).get(`/setup/circuits/${circuitId}?cml=${cml.id}`).set("Cookie", cookies.engineer).expect(200))
        .text,
    );
    expect(t).toContain(`${on} — Elbow renewed`);
    expect(t).toContain(`7.30 mm on ${on}`);
  });

  it("retires a CML and shows it retired", async () => {
    const cml = await db.knex("cmls").where({ tag: "OVHD-8-E1" }).first("id");
    await send("engineer", { intent: "retireCml", id: cml.id }).expect(302);
    expect(text((await page("engineer").expect(200)).text)).toContain("retired");
    expect((await db.knex("cmls").where({ id: cml.id }).first("retired_at")).retired_at).not.toBeNull();
  });

  it("is linked from the site page", async () => {
    const site = await request(app).get(`/setup/sites/${w.site.id}`).set("Cookie", cookies.engineer).expect(200);
    expect(site.text).toContain(`href="/setup/circuits/${circuitId}"`);
    expect(text(site.text)).toContain("Wall 7.11 mm from NPS 6 Sch 40 (ASME B36.10M)");
  });
});

describe("the set-up import page", () => {
  it("is linked from the site page and offers both templates to the owner's set-up roles only", async () => {
    const site = await request(app).get(`/setup/sites/${w.site.id}`).set("Cookie", cookies.engineer).expect(200);
    expect(site.text).toContain(`href="/setup/sites/${w.site.id}/import"`);
    const page = await request(app).get(`/setup/sites/${w.site.id}/import`).set("Cookie", cookies.engineer).expect(200);
    expect(page.text).toContain('href="/setup/circuit-design-template.csv"');
    expect(page.text).toContain('href="/setup/cml-template.csv"');
    const template = await request(app)
      .get("/setup/cml-template.csv")
      .set("Cookie", cookies.engineer)
      .expect(200)
      .expect("Content-Type", /text\/csv/);
    expect(template.text.split("\r\n")[0]).toBe(
      "circuit_tag,cml_tag,location,component,injection_point,baseline_mm,baseline_date",
    );
    await request(app).get(`/setup/sites/${w.site.id}/import`).set("Cookie", cookies.manager).expect(403);
    await request(app).get(`/setup/sites/${w.site.id}/import`).set("Cookie", cookies.engineer2).expect(404);
  });

  it("imports an uploaded CML file, lists problems of a bad one, and says nothing changed the second time", async () => {
    const csv = "circuit_tag,cml_tag,component,baseline_mm\r\nOVHD-8,OVHD-8-P9,pipe,7.05\r\n";
    const post = (text: string) =>
      request(app)
        .post(`/setup/sites/${w.site.id}/import`)
        .set("Cookie", cookies.engineer)
        .field("intent", "importCmls")
        .attach("file", Buffer.from(text), { filename: "cmls.csv", contentType: "text/csv" });
    const bad = await post("circuit_tag,cml_tag,component\r\nNOPE,X-9,pipe\r\n").expect(400);
    expect(text(bad.text)).toContain("Nothing was imported: one problem to correct");
    expect(text(bad.text)).toContain("This site has no circuit tagged NOPE.");
    const ok = await post(csv).expect(302);
    const flash = await request(app)
      .get(ok.headers.location)
      .set("Cookie", [cookies.engineer, ...(ok.headers["set-cookie"] ?? [])].join("; "));
    expect(text(flash.text)).toContain("1 CML(s) added");
    await post(csv).expect(302);
    expect(await db.knex("cmls").where({ tag: "OVHD-8-P9" }).count<{ n: string }[]>({ n: "*" })).toEqual([{ n: "1" }]);
  });
});
