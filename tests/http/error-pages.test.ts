import type { Express } from "express";
import request from "supertest";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { productionApp, shutdownApp } from "../helpers/app";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, type World } from "../helpers/fixtures";
import { sessionCookieFor } from "../helpers/session";

/** Data routes answer 403/404/409 with a page inside the layout: what happened, and where to go. */

let db: TestDatabase;
let app: Express;
let w: World;
let engineer: string;
let foreignEngineer: string;
let manager: string;

beforeAll(async () => {
  db = await createTestDatabase();
  process.env.DATABASE_URL = db.url;
  app = await productionApp();
  w = await buildWorld(db.knex);
  engineer = await sessionCookieFor(db.knex, w.users.engineer.id);
  foreignEngineer = await sessionCookieFor(db.knex, w.users.engineer2.id);
  manager = await sessionCookieFor(db.knex, w.users.manager.id);
});
afterAll(async () => {
  await shutdownApp();
  await db?.drop();
});

describe("error pages inside the layout", () => {
  it("shows another owner's point as not found, with the navigation and a way back", async () => {
    const res = await request(app).get(`/setup/points/${w.point}`).set("Cookie", foreignEngineer).expect(404);
    expect(res.text).toContain('aria-label="Main"');
    expect(res.text).toContain("Not found");
    expect(res.text).toContain("not shared with your organisation");
    expect(res.text).toContain('href="/setup/points"');
    expect(res.text).toContain("Go to the start page");
  });

  it("tells a plant manager in words that set-up is not theirs to change (403)", async () => {
    const res = await request(app).get(`/setup/points/${w.point}`).set("Cookie", manager).expect(403);
    expect(res.text).toContain('aria-label="Main"');
    expect(res.text).toContain("Not allowed");
  });

  it("answers a form that does nothing known with 400 inside the layout", async () => {
    const res = await request(app)
      .post(`/setup/points/${w.point}`)
      .set("Cookie", engineer)
      .type("form")
      .send("intent=somethingElse")
      .expect(400);
    expect(res.text).toContain('aria-label="Main"');
    expect(res.text).toContain("This form does not do that.");
  });
});
