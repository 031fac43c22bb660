import type { Express } from "express";
import request from "supertest";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { productionApp, shutdownApp } from "../helpers/app";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, dateFromToday, type World } from "../helpers/fixtures";
import { sessionCookieFor } from "../helpers/session";
import { approvedReadings, cml, designCircuit } from "../helpers/survey-world";

let db: TestDatabase;
let app: Express;
let w: World;
let circuitId: string;
let cmlId: string;
let surveyId: string;
const cookies: Record<"inspector" | "tech" | "engineer", string> = {} as never;
const day = dateFromToday(-1); // on or before today at every site

const form = (cookie: string, path: string, body: Record<string, string>) =>
  request(app).post(path).set("Cookie", cookie).type("form").send(body).redirects(0);
const field = (name: string) => `cml.${cmlId}.${name}`;

beforeAll(async () => {
  db = await createTestDatabase();
  process.env.DATABASE_URL = db.url;
  w = await buildWorld(db.knex);
  circuitId = (await db.knex("circuits").where({ site_id: w.site.id }).first("id")).id;
  await designCircuit(db.knex, circuitId, { structuralMinimumMm: 3, reason: "owner's minimum for sour service" });
  cmlId = await cml(db.knex, { ownerId: w.owner.id, circuitId }, { tag: "C-1-01", location: "downstream of the pump" });
  await approvedReadings(
    db.knex,
    {
      ownerId: w.owner.id,
      siteId: w.site.id,
      contractorId: w.inspection.id,
      createdBy: w.users.inspector.id,
      reference: "PA-SUB-90001",
    },
    [{ cmlId, circuitId, measuredOn: "2020-03-01", thicknessMm: 6.91 }],
  );
  app = await productionApp();
  cookies.inspector = await sessionCookieFor(db.knex, w.users.inspector.id);
  cookies.tech = await sessionCookieFor(db.knex, w.users.tech.id);
  cookies.engineer = await sessionCookieFor(db.knex, w.users.engineer.id);
});
afterAll(async () => {
  await shutdownApp();
  await db?.drop();
});

describe("thickness surveys for an inspection contractor's technician", () => {
  it("shows the surveys entry and the start form to the inspector only", async () => {
    const home = await request(app).get("/").set("Cookie", cookies.inspector).expect(200);
    expect(home.text).toContain('href="/surveys"');
    const couponHome = await request(app).get("/").set("Cookie", cookies.tech).expect(200);
    expect(couponHome.text).not.toContain('href="/surveys"');
    const page = await request(app).get("/surveys").set("Cookie", cookies.inspector).expect(200);
    expect(page.text).toContain("Start a survey");
    expect(page.text).toContain("C-1");
    const refused = await request(app).get("/surveys").set("Cookie", cookies.tech).expect(403);
    expect(refused.text).toContain("do not cover thickness inspection");
    await request(app).get("/surveys").set("Cookie", cookies.engineer).expect(403);
  });

  it("starts a survey and opens the grid with the last approved reading", async () => {
    const missing = await form(cookies.inspector, "/surveys", { intent: "startSurvey", siteId: w.site.id });
    expect(missing.status).toBe(400);
    expect(missing.text).toMatch(/role="alert"[^>]*>Tick at least one circuit to survey/);
    const res = await form(cookies.inspector, "/surveys", {
      intent: "startSurvey",
      siteId: w.site.id,
      [`circuit.${circuitId}`]: "on",
    });
    expect(res.status).toBe(302);
    surveyId = res.headers.location.split("/").pop()!;
    const grid = await request(app).get(`/surveys/${surveyId}`).set("Cookie", cookies.inspector).expect(200);
    expect(grid.text).toContain("C-1-01");
    expect(grid.text).toContain("downstream of the pump");
    expect(grid.text).toMatch(/6\.91 mm<!-- --> on <!-- -->2020-03-01/);
    expect(grid.text).toContain("Engineering caution");
    await request(app).get(`/surveys/${surveyId}`).set("Cookie", cookies.tech).expect(404);
    await request(app).get(`/surveys/${surveyId}`).set("Cookie", cookies.engineer).expect(403);
  });

  it("shows readings in the reader's units (US: inches)", async () => {
    await db.knex("users").where({ id: w.users.inspector.id }).update({ units: "us" });
    const us = await sessionCookieFor(db.knex, w.users.inspector.id);
    const grid = await request(app).get(`/surveys/${surveyId}`).set("Cookie", us).expect(200);
    // 6.91 mm ÷ 25.4 = 0.272 in (exact inch)
    expect(grid.text).toMatch(/0\.272 in<!-- --> on <!-- -->2020-03-01/);
    await db.knex("users").where({ id: w.users.inspector.id }).update({ units: "si" });
  });

  it("refuses a future date and a bad reading with the CML and field named, keeping what was typed", async () => {
    const res = await form(cookies.inspector, `/surveys/${surveyId}`, {
      intent: "saveReadings",
      [field("measuredOn")]: dateFromToday(3),
      [field("reading1")]: "6,8",
      [field("method")]: "UT",
    });
    expect(res.status).toBe(400);
    expect(res.text).toContain("CML C-1-01: the date");
    expect(res.text).toContain("is in the future");
    expect(res.text).toContain("uses a decimal comma");
    expect(res.text).toContain('value="6,8"');
    expect(await db.knex("thickness_readings").where({ submission_id: surveyId })).toEqual([]);
  });

  it("saves the grid, then imports a CSV, offers the template, and submits", async () => {
    const saved = await form(cookies.inspector, `/surveys/${surveyId}`, {
      intent: "saveReadings",
      [field("measuredOn")]: day,
      [field("reading1")]: "2.95",
      [field("method")]: "UT",
    });
    expect(saved.status).toBe(302);
    const grid = await request(app).get(`/surveys/${surveyId}`).set("Cookie", cookies.inspector).expect(200);
    // the flag the browser computes as you type is there on the first render too: 2.95 mm ≤ the required 3 mm
    expect(grid.text).toContain("at or below the circuit&#x27;s required thickness of 3 mm");

    const template = await request(app)
      .get(`/surveys/${surveyId}/template.csv`)
      .set("Cookie", cookies.inspector)
      .expect(200);
    expect(template.headers["content-type"]).toContain("text/csv");
    expect(template.text).toContain("CML tag,date,reading 1 mm");
    const csv = `${template.text.split("\r\n")[0].replace(/^\uFEFF/, "")}\r\nC-1-01,${day},6.8,6.85,,,UT,gauge 7,0.01,R. Okafor,\r\n`;
    const imported = await request(app)
      .post(`/surveys/${surveyId}/import`)
      .set("Cookie", cookies.inspector)
      .attach("file", Buffer.from(csv), { filename: "readings.csv", contentType: "text/csv" })
      .expect(200);
    expect(imported.text).toContain("1<!-- --> reading(s) saved");
    const bad = await request(app)
      .post(`/surveys/${surveyId}/import`)
      .set("Cookie", cookies.inspector)
      .attach("file", Buffer.from(csv.replace("C-1-01", "C-9-99")), { filename: "r.csv", contentType: "text/csv" })
      .expect(400);
    expect(bad.text).toContain("No CML tagged C-9-99 is on this survey&#x27;s circuits.");

    const submitted = await form(cookies.inspector, `/surveys/${surveyId}`, { intent: "submit", reply: "" });
    expect(submitted.status).toBe(302);
    const after = await request(app).get(`/surveys/${surveyId}`).set("Cookie", cookies.inspector).expect(200);
    expect(after.text).toContain("submitted");
    const again = await form(cookies.inspector, `/surveys/${surveyId}`, { intent: "submit", reply: "" });
    expect(again.status).toBe(409);
  });

  it("lists the survey with its kind on the submissions screen, linking to its grid", async () => {
    const list = await request(app).get("/submissions").set("Cookie", cookies.inspector).expect(200);
    expect(list.text).toContain("thickness survey");
    expect(list.text).toContain(`href="/surveys/${surveyId}"`);
    const old = await request(app).get(`/submissions/${surveyId}`).set("Cookie", cookies.inspector).redirects(0);
    expect(old.status).toBe(302);
    expect(old.headers.location).toBe(`/surveys/${surveyId}`);
    const forEngineer = await request(app).get("/submissions").set("Cookie", cookies.engineer).expect(200);
    expect(forEngineer.text).toContain("thickness survey");
  });
});
