import type { Express } from "express";
import request from "supertest";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { productionApp, shutdownApp } from "../helpers/app";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld } from "../helpers/fixtures";

/**
 * The whole OpenID Connect round trip against the local identity provider, driven by
 * hand so each step can be tampered with: forged state, replayed code, open redirect.
 */
let db: TestDatabase;
let app: Express;

beforeAll(async () => {
  db = await createTestDatabase();
  process.env.DATABASE_URL = db.url;
  await buildWorld(db.knex);
  app = await productionApp();
});
afterAll(async () => {
  await shutdownApp();
  await db?.drop();
});

const cookiesOf = (res: request.Response) =>
  ((res.headers["set-cookie"] as unknown as string[] | undefined) ?? [])
    .map((c) => c.split(";")[0])
    .filter((c) => !c.endsWith("="));

/** /auth/login → the provider → back: the callback path and the cookies the browser holds. */
async function startSignIn(email: string, redirectTo?: string) {
  const query = new URLSearchParams({ login_hint: email, ...(redirectTo ? { redirectTo } : {}) });
  const login = await request(app).get(`/auth/login?${query}`).expect(302);
  const cookies = cookiesOf(login);
  const atProvider = await fetch(login.headers.location, { redirect: "manual" });
  expect(atProvider.status).toBe(302);
  const back = new URL(atProvider.headers.get("location")!);
  expect(back.pathname).toBe("/auth/callback");
  return { callback: back.pathname + back.search, cookies };
}

describe("signing in", () => {
  it("verifies the provider's answer and opens a session for an invited, verified address", async () => {
    const { callback, cookies } = await startSignIn("engineer@one.test");
    const done = await request(app).get(callback).set("Cookie", cookies.join("; ")).expect(302);
    expect(done.headers.location).toBe("/");
    const session = cookiesOf(done).find((c) => c.startsWith("wallcast_session="));
    expect(session).toBeTruthy();
    const raw = (done.headers["set-cookie"] as unknown as string[]).find((c) => c.startsWith("wallcast_session="))!;
    expect(raw).toMatch(/HttpOnly/i);
    expect(raw).toMatch(/SameSite=Lax/i);
    const me = await request(app).get("/api/v1/me").set("Cookie", session!).expect(200);
    expect(me.body.role).toBe("integrity_engineer");
  });

  it("refuses a replayed code and a forged state without a session", async () => {
    const { callback, cookies } = await startSignIn("engineer@one.test");
    await request(app).get(callback).set("Cookie", cookies.join("; ")).expect(302);
    const replay = await request(app).get(callback).set("Cookie", cookies.join("; ")).expect(400);
    expect(replay.text).toMatch(/could not be completed/);
    expect(cookiesOf(replay).some((c) => c.startsWith("wallcast_session="))).toBe(false);

    const fresh = await startSignIn("engineer@one.test");
    const forged = fresh.callback.replace(/state=[^&]+/, "state=forged-by-someone-else");
    const res = await request(app).get(forged).set("Cookie", fresh.cookies.join("; ")).expect(400);
    expect(cookiesOf(res).some((c) => c.startsWith("wallcast_session="))).toBe(false);
    // and without the state cookie at all
    await request(app).get(fresh.callback).expect(400);
  });

  it("never redirects off-site after signing in", async () => {
    for (const target of ["https://evil.example/", "//evil.example", "/\\evil.example"]) {
      const { callback, cookies } = await startSignIn("manager@one.test", target);
      const done = await request(app).get(callback).set("Cookie", cookies.join("; ")).expect(302);
      expect(done.headers.location).toBe("/");
    }
    const { callback, cookies } = await startSignIn("manager@one.test", "/review?status=submitted");
    const done = await request(app).get(callback).set("Cookie", cookies.join("; ")).expect(302);
    expect(done.headers.location).toBe("/review?status=submitted");
  });

  it("gives an unknown, an unverified or a disabled address the no-access page and no session", async () => {
    await db.knex("users").insert({
      email: "unverified@owner.example",
      name: "U",
      role: "plant_manager",
      status: "invited",
      organisation_id: (await db.knex("organisations").where({ name: "Owner One" }).first("id")).id,
    });
    await db.knex("users").where({ email: "admin@one.test" }).update({ status: "disabled" });
    for (const [email, reason] of [
      ["stranger@nowhere.example", "unknown"],
      ["unverified@owner.example", "unverified"],
      ["admin@one.test", "disabled"],
    ]) {
      const { callback, cookies } = await startSignIn(email);
      const done = await request(app).get(callback).set("Cookie", cookies.join("; ")).expect(302);
      expect(done.headers.location).toBe(`/auth/no-access?reason=${reason}`);
      expect(cookiesOf(done).some((c) => c.startsWith("wallcast_session="))).toBe(false);
      const page = await request(app).get(done.headers.location).expect(403);
      expect(page.text).toMatch(/No Wallcast session was created/);
    }
    expect((await db.knex("users").where({ email: "stranger@nowhere.example" }).first()) ?? null).toBeNull();
  });

  it("signs out by deleting the session row", async () => {
    const { callback, cookies } = await startSignIn("tech@monitoring.test");
    const done = await request(app).get(callback).set("Cookie", cookies.join("; ")).expect(302);
    const session = cookiesOf(done).find((c) => c.startsWith("wallcast_session="))!;
    await request(app).post("/auth/logout").set("Cookie", session).expect(302);
    await request(app).get("/api/v1/me").set("Cookie", session).expect(401);
  });
});
