import { randomBytes } from "node:crypto";
import type { Express } from "express";
import request from "supertest";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { hashToken } from "~/models/api-clients.server";
import { productionApp, shutdownApp } from "../helpers/app";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, type World } from "../helpers/fixtures";
import { sessionCookieFor } from "../helpers/session";

/**
 * Bearer tokens of API clients on every /api/v1 operation: judged alone (never by a cookie
 * beside them), scoped, inside their owner's data only, expired or revoked → 401, over the
 * client's own rate limit → 429, no CORS.
 */

let db: TestDatabase;
let app: Express;
let w: World;
let engineer: string;
let tech: string;
let circuitA: string;
let circuitB: string;

const bearer = (token: string) => ({ Authorization: `Bearer ${token}` });

async function client(
  ownerId: string,
  scopes: string[],
  extra: { expires_at?: string; revoked_at?: string; requests_per_minute?: number; name?: string } = {},
) {
  const token = `wct_${randomBytes(32).toString("base64url")}`;
  const [row] = await db
    .knex("api_clients")
    .insert({
      owner_id: ownerId,
      name: extra.name ?? `Client ${scopes.join("+")}`,
      scopes,
      token_hash: hashToken(token),
      token_hint: token.slice(0, 12),
      ...extra,
    })
    .returning("id");
  return { token, id: row.id as string };
}

beforeAll(async () => {
  db = await createTestDatabase();
  process.env.DATABASE_URL = db.url;
  w = await buildWorld(db.knex);
  app = await productionApp();
  engineer = await sessionCookieFor(db.knex, w.users.engineer.id);
  tech = await sessionCookieFor(db.knex, w.users.tech.id);
  circuitA = (await db.knex("circuits").where({ site_id: w.site.id }).first("id")).id;
  const [unitB] = await db
    .knex("process_units")
    .insert({ site_id: w.foreignSite.id, tag: "ZU-1", description: "Unit Z" })
    .returning("id");
  const [cB] = await db
    .knex("circuits")
    .insert({ unit_id: unitB.id, site_id: w.foreignSite.id, tag: "ZC-1", material_code: "carbon-steel", service: "" })
    .returning("id");
  circuitB = cB.id;
});
afterAll(async () => {
  await shutdownApp();
  await db?.drop();
});

describe("who a token is", () => {
  it("GET /api/v1/me names the client and its organisation", async () => {
    const c = await client(w.owner.id, ["results:read", "outlook:read"], { name: "Plant LIMS" });
    const res = await request(app).get("/api/v1/me").set(bearer(c.token)).expect(200);
    expect(res.body).toEqual({
      client: { id: c.id, name: "Plant LIMS", scopes: ["results:read", "outlook:read"] },
      organisation: { id: w.owner.id, name: "Owner One", kind: "owner" },
    });
  });

  it("is judged by the token alone when a valid session cookie comes beside it", async () => {
    const c = await client(w.owner.id, ["outlook:read"], { name: "Reader" });
    const withCookie = await request(app).get("/api/v1/me").set(bearer(c.token)).set("Cookie", engineer).expect(200);
    expect(withCookie.body.client.name).toBe("Reader");
    expect(withCookie.body.email).toBeUndefined();
    // a bad token never falls back to the cookie
    const bad = await request(app)
      .get("/api/v1/me")
      .set(bearer(`wct_${"A".repeat(43)}`))
      .set("Cookie", engineer)
      .expect(401);
    expect(bad.headers["content-type"]).toMatch(/application\/problem\+json/);
    expect(bad.headers["www-authenticate"]).toMatch(/^Bearer realm="wallcast", error="invalid_token"/);
    expect(bad.body.detail).toBe("The bearer token is not valid.");
    expect(bad.body.requestId).toBe(bad.headers["x-request-id"]);
    // a header that is not "Bearer <token>" is refused too, never read as no header
    const basic = await request(app).get("/api/v1/me").set("Authorization", "Basic abc").set("Cookie", engineer);
    expect(basic.status).toBe(401);
    expect(basic.body.detail).toMatch(/Bearer <token>/);
  });

  it("refuses revoked and expired tokens with 401 saying which", async () => {
    const revoked = await client(w.owner.id, ["outlook:read"], { revoked_at: new Date().toISOString() });
    const r = await request(app).get("/api/v1/circuits").set(bearer(revoked.token)).expect(401);
    expect(r.body.detail).toMatch(/revoked/);
    const expired = await client(w.owner.id, ["outlook:read"], {
      expires_at: new Date(Date.now() - 1000).toISOString(),
    });
    const e = await request(app).get("/api/v1/circuits").set(bearer(expired.token)).expect(401);
    expect(e.body.detail).toMatch(/expired/);
    const later = await client(w.owner.id, ["outlook:read"], {
      expires_at: new Date(Date.now() + 3_600_000).toISOString(),
    });
    await request(app).get("/api/v1/circuits").set(bearer(later.token)).expect(200);
  });

  it("keeps last_used_at, written at most once a minute", async () => {
    const c = await client(w.owner.id, ["outlook:read"]);
    await request(app).get("/api/v1/me").set(bearer(c.token)).expect(200);
    const first = (await db.knex("api_clients").where({ id: c.id }).first("last_used_at")).last_used_at as Date;
    expect(first).toBeInstanceOf(Date);
    await request(app).get("/api/v1/me").set(bearer(c.token)).expect(200);
    const second = (await db.knex("api_clients").where({ id: c.id }).first("last_used_at")).last_used_at as Date;
    expect(second.getTime()).toBe(first.getTime());
  });
});

describe("scopes", () => {
  it("answers 403 naming the scope a token lacks", async () => {
    const results = await client(w.owner.id, ["results:read"]);
    const res = await request(app).get("/api/v1/circuits").set(bearer(results.token)).expect(403);
    expect(res.body.detail).toBe("This token lacks the scope outlook:read, which this operation needs.");
    expect(res.body.scopeNeeded).toBe("outlook:read");
    await request(app).get(`/api/v1/circuits/${circuitA}`).set(bearer(results.token)).expect(403);
    await request(app).get("/api/v1/submissions").set(bearer(results.token)).expect(200);
    const outlook = await client(w.owner.id, ["outlook:read"]);
    const sub = await request(app).get("/api/v1/submissions").set(bearer(outlook.token)).expect(403);
    expect(sub.body.scopeNeeded).toBe("results:read");
  });

  it("lets any scope read sites and points, with their tags", async () => {
    const lims = await client(w.owner.id, ["lims:write"]);
    const sites = await request(app).get("/api/v1/sites").set(bearer(lims.token)).expect(200);
    expect(sites.body.items.map((s: { code: string }) => s.code).sort()).toEqual([w.site.code, w.site2.code].sort());
    const points = await request(app).get("/api/v1/points").set(bearer(lims.token)).expect(200);
    expect(points.body.items.map((p: { tag: string }) => p.tag)).toEqual(["CP-1", "CP-2"]);
    expect(points.body.items[0]).toMatchObject({
      kind: "coupon",
      site: { code: w.site.code },
      circuit: { tag: "C-1" },
    });
    const paged = await request(app).get("/api/v1/points?limit=1").set(bearer(lims.token)).expect(200);
    expect(paged.body.items.map((p: { tag: string }) => p.tag)).toEqual(["CP-1"]);
    const next = await request(app)
      .get(`/api/v1/points?limit=1&cursor=${paged.body.nextCursor}`)
      .set(bearer(lims.token))
      .expect(200);
    expect(next.body).toMatchObject({ items: [{ tag: "CP-2" }], nextCursor: null });
    const unknown = await request(app).get("/api/v1/points?limt=5").set(bearer(lims.token)).expect(400);
    expect(unknown.body.detail).toBe("Unknown query parameter: limt");
  });

  it("applies the person's role rules to a session: a contractor sees no owner directory", async () => {
    await request(app).get("/api/v1/sites").set("Cookie", tech).expect(404);
    await request(app).get("/api/v1/points").set("Cookie", tech).expect(404);
    await request(app).get("/api/v1/sites").set("Cookie", engineer).expect(200);
  });
});

describe("a token acts only inside its owner's data", () => {
  it("reads its own circuits and gets 404 for another owner's", async () => {
    const a = await client(w.owner.id, ["outlook:read", "results:read"]);
    const list = await request(app).get("/api/v1/circuits").set(bearer(a.token)).expect(200);
    expect(list.body.items.map((c: { id: string }) => c.id)).toEqual([circuitA]);
    expect(list.body.caution).toMatch(/^Decision support only\./);
    await request(app).get(`/api/v1/circuits/${circuitA}`).set(bearer(a.token)).expect(200);
    const foreign = await request(app).get(`/api/v1/circuits/${circuitB}`).set(bearer(a.token)).expect(404);
    expect(foreign.headers["content-type"]).toMatch(/application\/problem\+json/);
    await request(app).get(`/api/v1/circuits?siteId=${w.foreignSite.id}`).set(bearer(a.token)).expect(200);
    const b = await client(w.owner2.id, ["outlook:read"]);
    const theirs = await request(app).get("/api/v1/circuits").set(bearer(b.token)).expect(200);
    expect(theirs.body.items.map((c: { id: string }) => c.id)).toEqual([circuitB]);
    const sites = await request(app).get("/api/v1/sites").set(bearer(b.token)).expect(200);
    expect(sites.body.items.map((s: { code: string }) => s.code)).toEqual(["PZ"]);
  });
});

describe("limits and methods", () => {
  it("answers 429 with Retry-After once a client passes its own limit a minute", async () => {
    const c = await client(w.owner.id, ["outlook:read"], { requests_per_minute: 2 });
    await request(app).get("/api/v1/me").set(bearer(c.token)).expect(200);
    await request(app).get("/api/v1/me").set(bearer(c.token)).expect(200);
    const over = await request(app).get("/api/v1/me").set(bearer(c.token)).expect(429);
    expect(Number(over.headers["retry-after"])).toBeGreaterThan(0);
    expect(over.body.detail).toMatch(/^This API client has sent too many requests\. Try again in/);
    // another client's count is its own
    const other = await client(w.owner.id, ["outlook:read"]);
    await request(app).get("/api/v1/me").set(bearer(other.token)).expect(200);
  });

  it("answers 405 to a method an endpoint does not take, with a token", async () => {
    const c = await client(w.owner.id, ["outlook:read"]);
    const res = await request(app).post("/api/v1/circuits").set(bearer(c.token)).send({}).expect(405);
    expect(res.headers.allow).toBe("GET");
  });

  it("sends no CORS headers: the API is for servers, not for other sites' pages", async () => {
    const c = await client(w.owner.id, ["outlook:read"]);
    const get = await request(app)
      .get("/api/v1/me")
      .set(bearer(c.token))
      .set("Origin", "https://elsewhere.example")
      .expect(200);
    expect(get.headers["access-control-allow-origin"]).toBeUndefined();
    const preflight = await request(app)
      .options("/api/v1/me")
      .set("Origin", "https://elsewhere.example")
      .set("Access-Control-Request-Method", "GET")
      .set("Access-Control-Request-Headers", "authorization");
    expect(preflight.status).toBeLessThan(500);
    expect(preflight.headers["access-control-allow-origin"]).toBeUndefined();
    expect(preflight.headers["access-control-allow-headers"]).toBeUndefined();
  });
});
