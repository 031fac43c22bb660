import type { Express } from "express";
import request from "supertest";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { CAUTION_LEAD } from "../../app/services/caution";
import { decide } from "../../app/models/review.server";
import { productionApp, shutdownApp } from "../helpers/app";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, type World } from "../helpers/fixtures";
import { buildSurveyWorld, flag, type SurveyWorld } from "../helpers/review-world";
import { sessionCookieFor } from "../helpers/session";

/** The review page of a thickness survey through the real request handler. */

let db: TestDatabase;
let app: Express;
let w: World;
let s: SurveyWorld;
let engineer: string;
let foreignEngineer: string;
let surveyId: string;

/** The words of a page: tags gone (units and tags sit in their own spans), entities read. */
const words = (html: string) =>
  html
    .replace(/<[^>]+>/g, "")
    .replace(/&#x27;/g, "'")
    .replace(/&quot;/g, '"')
    .replace(/&amp;/g, "&");
const form = (fields: Array<[string, string]>) => new URLSearchParams(fields).toString();
const versionOf = async (id: string) => String((await db.knex("submissions").where({ id }).first("version")).version);

beforeAll(async () => {
  db = await createTestDatabase();
  process.env.DATABASE_URL = db.url;
  app = await productionApp();
  w = await buildWorld(db.knex);
  s = await buildSurveyWorld(db.knex, w);
  engineer = await sessionCookieFor(db.knex, w.users.engineer.id);
  foreignEngineer = await sessionCookieFor(db.knex, w.users.engineer2.id);
  // An approved survey a year earlier gives TS-CML-01 its last reading.
  const earlier = await s.submitSurvey([{ cml: "TS-CML-01", measuredOn: "2025-11-20", thicknessMm: 3.0 }]);
  await decide(db.knex, w.users.engineer, earlier, {
    decision: "approve",
    version: Number(await versionOf(earlier)),
    comment: "",
    confirmed: true,
  });
  surveyId = await s.submitSurvey([
    {
      cml: "TS-CML-01",
      measuredOn: "2026-11-20",
      thicknessMm: 2.75,
      quadrantsMm: [2.75, 2.9, 3.0, 2.95],
      flags: [flag.belowRequired("TS-CML-01", 2.75)],
    },
    { cml: "TS-CML-03", measuredOn: "2026-11-20", thicknessMm: 6.9, flags: [flag.belowResolution()] },
  ]);
}, 120_000);
afterAll(async () => {
  await shutdownApp();
  await db?.drop();
});

describe("the review page of a thickness survey", () => {
  it("shows circuits with required thickness, each CML's reading, history, change and flags, and the decision form", async () => {
    const res = await request(app).get(`/review/${surveyId}`).set("Cookie", engineer);
    expect(res.status).toBe(200);
    const page = words(res.text);
    expect(page).toContain("Thickness survey PA-SUB-");
    // Required thickness of the circuit and what governed it (API 574 structural minimum for NPS 6).
    expect(page).toContain("TS-100");
    expect(page).toContain("2.79 mm");
    expect(page).toContain("Governed by the API 574 structural minimum for NPS 6");
    expect(page).toContain(CAUTION_LEAD);
    // The reading and its quadrants, the instrument and its resolution.
    expect(page).toContain("TS-CML-01 · TS-100");
    expect(page).toContain("2.75 mm · 2.90 mm · 3.00 mm · 2.95 mm");
    expect(page).toContain("UT gauge 38DL-0412, resolves 0.01 mm");
    // Below required thickness is said in words, not colour alone.
    expect(page).toContain("At or below required thickness: 2.75 mm measured against 2.79 mm required.");
    // The change since the approved reading of 2025-11-20 and its rate (0.25 mm over 365 days).
    expect(page).toContain("approved reading of 2025-11-20, 3.00 mm");
    expect(page).toContain("−0.25 mm over 1.00 years");
    expect(page).toContain(`${(0.25 / (365 / 365.25)).toFixed(3)} mm/y`);
    // TS-CML-03 has no approved reading: its history shows the base-line.
    expect(page).toContain("Base-line");
    // The warning asks a reason; the note does not.
    expect(page).toContain("Why approve CML TS-CML-01 despite this warning");
    expect(page).not.toContain("Why approve CML TS-CML-03");
    expect(page).toContain("I approve the 2 readings at CMLs TS-CML-01, TS-CML-03 on circuit TS-100");
    expect(page).toContain("No survey sheet, photos or instrument export were attached.");
  });

  it("is not found for another owner's engineer", async () => {
    const res = await request(app).get(`/review/${surveyId}`).set("Cookie", foreignEngineer);
    expect(res.status).toBe(404);
    expect(res.text).not.toContain("TS-CML-01");
  });

  it("re-shows the form with the reason asked for each unanswered warning, and records nothing", async () => {
    const version = await versionOf(surveyId);
    const res = await request(app)
      .post(`/review/${surveyId}`)
      .set("Cookie", engineer)
      .set("Content-Type", "application/x-www-form-urlencoded")
      .send(
        form([
          ["intent", "approve"],
          ["version", version],
          ["comment", ""],
          ["confirm", "on"],
        ]),
      )
      .redirects(0);
    expect(res.status).toBe(400);
    expect(words(res.text)).toContain("Say why this warning on CML TS-CML-01 does not stop approval.");
    expect(await versionOf(surveyId)).toBe(version);
  });

  it("lists the survey in the queue's API with its kind and readings", async () => {
    const res = await request(app)
      .get("/api/v1/submissions?kind=thickness&status=submitted")
      .set("Cookie", engineer)
      .set("Accept", "application/json");
    expect(res.status).toBe(200);
    const item = res.body.items.find((i: { id: string }) => i.id === surveyId);
    expect(item).toMatchObject({ kind: "thickness", resultCount: 2, flagCount: 2, worstSeverity: null });
    const one = await request(app).get(`/api/v1/submissions/${surveyId}`).set("Cookie", engineer);
    expect(one.status).toBe(200);
    expect(one.body.readings.map((r: { cmlTag: string }) => r.cmlTag)).toEqual(["TS-CML-01", "TS-CML-03"]);
  });

  it("approves with the reason and the tick, then shows the acknowledgement in the revisions", async () => {
    const version = await versionOf(surveyId);
    const reading = await db
      .knex("thickness_readings")
      .where({ submission_id: surveyId, cml_id: s.cmls["TS-CML-01"] })
      .first("id");
    const res = await request(app)
      .post(`/review/${surveyId}`)
      .set("Cookie", engineer)
      .set("Content-Type", "application/x-www-form-urlencoded")
      .send(
        form([
          ["intent", "approve"],
          ["version", version],
          ["comment", ""],
          [`ack.${reading.id}.below-required`, "Sleeve fitted under work order 4411"],
          ["confirm", "on"],
        ]),
      )
      .redirects(0);
    expect(res.status).toBe(302);
    const page = words((await request(app).get(`/review/${surveyId}`).set("Cookie", engineer)).text);
    expect(page).toContain("Warning acknowledged on CML TS-CML-01");
    expect(page).toContain("Sleeve fitted under work order 4411");
  });
});
