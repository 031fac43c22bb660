import type { Express } from "express";
import request from "supertest";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { productionApp, shutdownApp } from "../helpers/app";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, type World } from "../helpers/fixtures";
import { sessionCookieFor } from "../helpers/session";

let db: TestDatabase;
let app: Express;
let w: World;
let engineer: string;
let tech: string;
let inspector: string;
let foreign: string;

beforeAll(async () => {
  db = await createTestDatabase();
  process.env.DATABASE_URL = db.url;
  w = await buildWorld(db.knex);
  app = await productionApp();
  engineer = await sessionCookieFor(db.knex, w.users.engineer.id);
  tech = await sessionCookieFor(db.knex, w.users.tech.id);
  inspector = await sessionCookieFor(db.knex, w.users.inspector.id);
  foreign = await sessionCookieFor(db.knex, w.users.engineer2.id);
});
afterAll(async () => {
  await shutdownApp();
  await db?.drop();
});

const problemShape = (status: number) => ({
  type: expect.any(String),
  title: expect.any(String),
  status,
  detail: expect.any(String),
  requestId: expect.any(String),
});

describe("/api/v1/me", () => {
  it("answers who is signed in", async () => {
    const res = await request(app).get("/api/v1/me").set("Cookie", engineer).expect(200);
    expect(res.body).toEqual({
      email: "engineer@one.test",
      name: "engineer",
      role: "integrity_engineer",
      units: "si",
      organisation: { id: w.owner.id, name: "Owner One", kind: "owner" },
    });
  });

  it("is a problem+json 401 when signed out, or with a tampered cookie", async () => {
    const res = await request(app).get("/api/v1/me").expect(401);
    expect(res.headers["content-type"]).toMatch(/application\/problem\+json/);
    expect(res.body).toEqual(problemShape(401));
    expect(res.body.requestId).toBe(res.headers["x-request-id"]);
    // Change one character at the start of the signature (the last characters of base64
    // can be padding bits that decode to the same bytes, so they are not a reliable test).
    const value = decodeURIComponent(engineer.slice(engineer.indexOf("=") + 1));
    const dot = value.lastIndexOf(".");
    const flipped = value.slice(0, dot + 1) + (value[dot + 1] === "A" ? "B" : "A") + value.slice(dot + 2);
    const tampered = `wallcast_session=${encodeURIComponent(flipped)}`;
    await request(app).get("/api/v1/me").set("Cookie", tampered).expect(401);
  });

  it("stops working at once when the user is disabled", async () => {
    const cookie = await sessionCookieFor(db.knex, w.users.manager.id);
    await request(app).get("/api/v1/me").set("Cookie", cookie).expect(200);
    await db.knex("users").where({ id: w.users.manager.id }).update({ status: "disabled" });
    await request(app).get("/api/v1/me").set("Cookie", cookie).expect(401);
    expect(await db.knex("sessions").where({ user_id: w.users.manager.id }).count({ n: "*" }).first()).toEqual({
      n: "0",
    });
  });
});

describe("unknown endpoints and methods", () => {
  it("answers an unknown /api/v1 path with a problem+json 404, whatever the method", async () => {
    const get = await request(app).get("/api/v1/nothing/here").set("Cookie", engineer).expect(404);
    expect(get.body).toEqual(problemShape(404));
    const post = await request(app).post("/api/v1/nothing").send({}).expect(404);
    expect(post.headers["content-type"]).toMatch(/problem\+json/);
  });

  it("answers other methods on the submissions endpoints with 405 and Allow", async () => {
    const res = await request(app).post("/api/v1/submissions").set("Cookie", engineer).send({}).expect(405);
    expect(res.headers.allow).toBe("GET");
    expect(res.body).toEqual(problemShape(405));
    await request(app).delete(`/api/v1/submissions/${w.owner.id}`).set("Cookie", engineer).expect(405);
  });

  it("refuses a cross-site POST by its Origin header", async () => {
    const res = await request(app)
      .post("/api/v1/me")
      .set("Cookie", engineer)
      .set("Origin", "https://evil.example")
      .send({})
      .expect(403);
    expect(res.body).toEqual(problemShape(403));
    await request(app).post("/auth/logout").set("Cookie", engineer).set("Origin", "https://evil.example").expect(403);
    // still signed in: the forged sign-out did nothing
    await request(app).get("/api/v1/me").set("Cookie", engineer).expect(200);
  });
});

describe("/api/v1/submissions", () => {
  it("validates the query with a problem naming the field", async () => {
    const res = await request(app).get("/api/v1/submissions?limit=500").set("Cookie", engineer).expect(400);
    expect(res.body.detail).toMatch(/limit/);
    expect(res.body.field).toBe("limit");
    await request(app).get("/api/v1/submissions?cursor=garbage").set("Cookie", engineer).expect(400);
    // Times JavaScript reads but PostgreSQL does not (year 275760), or only to the millisecond: 400, never 500.
    const id = "7d3c1a52-4a4b-4c7e-9d1e-2f6a8b9c0d1e";
    for (const text of [`+275760-09-13T00:00:00.000Z|${id}`, `2026-11-20T10:00:00.123Z|${id}`]) {
      const cursor = Buffer.from(text, "utf8").toString("base64url");
      const bad = await request(app).get(`/api/v1/submissions?cursor=${cursor}`).set("Cookie", engineer).expect(400);
      expect(bad.body).toMatchObject({
        status: 400,
        field: "cursor",
        detail: "cursor is not one this endpoint handed out.",
      });
    }
    await request(app).get("/api/v1/submissions?site=nope").set("Cookie", engineer).expect(400);
  });

  it("returns items and nextCursor, scoped to the caller", async () => {
    const own = await request(app).get("/api/v1/submissions").set("Cookie", engineer).expect(200);
    expect(own.body).toEqual({ items: [], nextCursor: null });
    const [sub] = await db
      .knex("submissions")
      .insert({
        owner_id: w.owner.id,
        site_id: w.site.id,
        contractor_id: w.monitoring.id,
        kind: "coupon",
        status: "submitted",
        reference: "PA-SUB-00001",
        submitted_at: db.knex.fn.now(),
      })
      .returning("id");
    const mine = await request(app).get("/api/v1/submissions?status=submitted").set("Cookie", engineer).expect(200);
    expect(mine.body.items.map((i: { id: string }) => i.id)).toEqual([sub.id]);
    const theirs = await request(app).get("/api/v1/submissions").set("Cookie", foreign).expect(200);
    expect(theirs.body.items).toEqual([]);
    const contractor = await request(app).get("/api/v1/submissions").set("Cookie", tech).expect(200);
    expect(contractor.body.items).toHaveLength(1);
    const otherContractor = await request(app).get("/api/v1/submissions").set("Cookie", inspector).expect(200);
    expect(otherContractor.body.items).toEqual([]);

    await request(app).get(`/api/v1/submissions/${sub.id}`).set("Cookie", engineer).expect(200);
    const hidden = await request(app).get(`/api/v1/submissions/${sub.id}`).set("Cookie", foreign).expect(404);
    expect(hidden.body).toEqual(problemShape(404));
    await request(app).get(`/api/v1/submissions/${sub.id}`).set("Cookie", inspector).expect(404);
    await request(app).get("/api/v1/submissions/not-a-uuid").set("Cookie", engineer).expect(404);
    await request(app).get(`/api/v1/submissions/${sub.id}`).expect(401);
  });
});
