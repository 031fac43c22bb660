import { randomBytes } from "node:crypto";
import type { Express } from "express";
import request from "supertest";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { hashToken } from "~/models/api-clients.server";
import { decide, openCorrection } from "~/models/review.server";
import { productionApp, shutdownApp } from "../helpers/app";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, type World } from "../helpers/fixtures";
import { buildSurveyWorld, type SurveyWorld } from "../helpers/review-world";
import { sessionCookieFor } from "../helpers/session";

/**
 * GET /api/v1/results: approved readings and results as a change feed — approvals and
 * supersessions in order, cursor pages that stay put while rows are inserted, a change
 * committed late never behind a cursor, another owner's token sees nothing of it.
 */

let db: TestDatabase;
let app: Express;
let w: World;
let s: SurveyWorld;
let token: string;
let tokenB: string;
let tech: string;

const bearer = (t: string) => ({ Authorization: `Bearer ${t}` });

async function client(ownerId: string, scopes: string[]) {
  const t = `wct_${randomBytes(32).toString("base64url")}`;
  await db.knex("api_clients").insert({
    owner_id: ownerId,
    name: `Feed ${scopes.join("+")} ${t.slice(4, 8)}`,
    scopes,
    token_hash: hashToken(t),
    token_hint: t.slice(0, 12),
  });
  return t;
}

const versionOf = async (id: string) => (await db.knex("submissions").where({ id }).first("version")).version;
const approve = async (id: string) =>
  decide(db.knex, w.users.engineer, id, {
    decision: "approve",
    version: await versionOf(id),
    comment: "",
    confirmed: true,
  });

async function feed(query = "", t = token) {
  const res = await request(app).get(`/api/v1/results${query}`).set(bearer(t));
  expect(res.status, res.text.slice(0, 300)).toBe(200);
  return res.body as { items: Array<Record<string, any>>; nextCursor: string | null };
}

beforeAll(async () => {
  db = await createTestDatabase();
  process.env.DATABASE_URL = db.url;
  w = await buildWorld(db.knex);
  s = await buildSurveyWorld(db.knex, w);
  app = await productionApp();
  token = await client(w.owner.id, ["results:read"]);
  tokenB = await client(w.owner2.id, ["results:read"]);
  tech = await sessionCookieFor(db.knex, w.users.inspector.id);
});
afterAll(async () => {
  await shutdownApp();
  await db?.drop();
});

describe("the results change feed", () => {
  let first: string;
  let correction: string;

  it("lists a survey's readings once it is approved, with their submission and circuit", async () => {
    expect((await feed()).items).toEqual([]);
    first = await s.submitSurvey([
      { cml: "TS-CML-01", measuredOn: "2026-10-01", thicknessMm: 6.4 },
      { cml: "TS-CML-03", measuredOn: "2026-10-01", thicknessMm: 6.8 },
    ]);
    // submitted is not approved: nothing yet
    expect((await feed()).items).toEqual([]);
    await approve(first);
    const page = await feed();
    expect(page.items.map((i) => [i.kind, i.status, i.reading.cmlTag, i.reading.thicknessMm])).toEqual([
      ["thickness", "approved", expect.any(String), expect.any(Number)],
      ["thickness", "approved", expect.any(String), expect.any(Number)],
    ]);
    expect(page.items.map((i) => i.reading.cmlTag).sort()).toEqual(["TS-CML-01", "TS-CML-03"]);
    expect(page.items[0]).toMatchObject({
      submission: { id: first },
      site: { code: w.site.code },
      circuit: { tag: "TS-100" },
      supersededBy: null,
      reading: { measuredOn: "2026-10-01", method: "UT", instrumentResolutionMm: 0.01 },
    });
    expect(page.nextCursor).toBe(page.items[1].change);
    // from the cursor: nothing newer, and the cursor stays where it was
    const after = await feed(`?cursor=${page.nextCursor}`);
    expect(after).toEqual({ items: [], nextCursor: page.nextCursor });
  });

  it("adds a superseded change naming what replaced each reading when a correction is approved", async () => {
    const start = (await feed()).nextCursor;
    const opened = await openCorrection(db.knex, w.users.engineer, first, "TS-CML-03 read on the wrong tee");
    correction = opened.correctionId;
    await s.resubmitSurvey(correction, [
      { cml: "TS-CML-01", measuredOn: "2026-10-01", thicknessMm: 6.4 },
      { cml: "TS-CML-03", measuredOn: "2026-10-02", thicknessMm: 6.6 },
    ]);
    await approve(correction);
    const changes = (await feed(`?cursor=${start}`)).items;
    const superseded = changes.filter((i) => i.status === "superseded");
    const approved = changes.filter((i) => i.status === "approved");
    expect(superseded.map((i) => i.submission.id)).toEqual([first, first]);
    expect(approved.map((i) => i.submission.id)).toEqual([correction, correction]);
    // one transaction: the correction approved, then the survey it replaces superseded
    expect(changes.map((i) => i.status)).toEqual(["approved", "approved", "superseded", "superseded"]);
    const byCml = new Map(approved.map((i) => [i.reading.cmlTag, i.id]));
    for (const old of superseded) {
      expect(old.supersededBy).toEqual({
        submissionId: correction,
        reference: expect.any(String),
        itemId: byCml.get(old.reading.cmlTag),
      });
    }
    expect(await feed("?kind=coupon")).toEqual({ items: [], nextCursor: null });
  });

  it("pages in a stable order while rows are inserted, and never skips a change committed late", async () => {
    const all = (await feed()).items;
    const two = await feed("?limit=2");
    expect(two.items.map((i) => i.change)).toEqual(all.slice(0, 2).map((i) => i.change));

    // A transaction that writes a change and has not committed yet holds the feed back:
    // changes committed after it started are not shown past it until it ends.
    const slow = await db.knex.transaction();
    const late = await s.submitSurvey([{ cml: "TS-CML-01", measuredOn: "2026-11-01", thicknessMm: 6.3 }]);
    try {
      await slow.raw("select pg_current_xact_id()"); // the slow transaction has its id before the next approval
      await approve(late);
      const during = await feed(`?cursor=${two.nextCursor}`);
      expect(during.items.map((i) => i.change)).toEqual(all.slice(2).map((i) => i.change));
    } finally {
      await slow.commit();
    }
    const afterwards = await feed(`?cursor=${two.nextCursor}`);
    expect(afterwards.items.map((i) => i.change)).toEqual([...all.slice(2).map((i) => i.change), expect.any(String)]);
    expect(afterwards.items.at(-1)).toMatchObject({ submission: { id: late }, status: "approved" });
  });

  it("shows another owner's token nothing, refuses bad cursors and contractor sessions", async () => {
    expect(await feed("", tokenB)).toEqual({ items: [], nextCursor: null });
    const page = await feed();
    expect((await feed(`?cursor=${page.nextCursor}`, tokenB)).items).toEqual([]);
    for (const bad of ["abc", Buffer.from("1:x").toString("base64url"), Buffer.from("-1:2").toString("base64url")]) {
      const res = await request(app).get(`/api/v1/results?cursor=${bad}`).set(bearer(token)).expect(400);
      expect(res.body).toMatchObject({ field: "cursor", detail: "cursor is not one this endpoint handed out." });
    }
    await request(app).get("/api/v1/results?limit=0").set(bearer(token)).expect(400);
    await request(app).get("/api/v1/results?since=2026").set(bearer(token)).expect(400);
    await request(app).get("/api/v1/results").set("Cookie", tech).expect(404);
    const outlook = await client(w.owner.id, ["outlook:read"]);
    await request(app).get("/api/v1/results").set(bearer(outlook)).expect(403);
  });
});
