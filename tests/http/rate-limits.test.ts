import type { Express } from "express";
import request from "supertest";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { productionApp, shutdownApp } from "../helpers/app";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld } from "../helpers/fixtures";
import { sessionCookieFor } from "../helpers/session";

/**
 * Every limited route over its (small, for the test) limit: 429 with Retry-After, a page
 * that says when to try again, problem+json under the JSON endpoints. The client's
 * address comes from X-Forwarded-For because the app trusts the loopback proxy here.
 */
let db: TestDatabase;
let app: Express;
let w: Awaited<ReturnType<typeof buildWorld>>;
const cookies: Record<string, string> = {};

beforeAll(async () => {
  db = await createTestDatabase();
  process.env.DATABASE_URL = db.url;
  process.env.RATE_LIMITS = [
    "signInStartPerIp=3/60",
    "signInStartPerEmail=4/60",
    "signInCallbackPerIp=3/60",
    "signInCallbackPerEmail=2/60",
    "uploadsPerUser=2/3600",
    "auditViewsPerUser=2/60",
    "auditExportPerUser=1/3600",
  ].join(",");
  w = await buildWorld(db.knex);
  app = await productionApp({ trustProxy: "loopback" });
  cookies.admin = await sessionCookieFor(db.knex, w.users.admin.id);
  cookies.engineer = await sessionCookieFor(db.knex, w.users.engineer.id);
  cookies.tech = await sessionCookieFor(db.knex, w.users.tech.id);
});
afterAll(async () => {
  delete process.env.RATE_LIMITS;
  await shutdownApp();
  await db?.drop();
});

const cookiesOf = (res: request.Response) =>
  ((res.headers["set-cookie"] as unknown as string[] | undefined) ?? [])
    .map((c) => c.split(";")[0])
    .filter((c) => !c.endsWith("="));

/** A 429 that says when to retry, in the header and in words. */
function expectTooMany(res: request.Response) {
  expect(res.status).toBe(429);
  const retryAfter = Number(res.headers["retry-after"]);
  expect(Number.isInteger(retryAfter)).toBe(true);
  expect(retryAfter).toBeGreaterThanOrEqual(1);
  return retryAfter;
}

const login = (ip: string, hint?: string) =>
  request(app)
    .get(`/auth/login${hint ? `?login_hint=${encodeURIComponent(hint)}` : ""}`)
    .set("X-Forwarded-For", ip);

describe("sign-in limits", () => {
  it("limits starting a sign-in per address", async () => {
    for (const hint of ["a@one.test", "b@one.test", "c@one.test"]) await login("10.0.0.1", hint).expect(302);
    const res = await login("10.0.0.1", "d@one.test");
    const retryAfter = expectTooMany(res);
    expect(retryAfter).toBeLessThanOrEqual(60);
    expect(res.headers["content-type"]).toMatch(/text\/html/);
    expect(res.text).toMatch(
      /Too many sign-ins were started from your network\. Try again in \d+ (seconds?|minutes?)\./,
    );
    // another address is not affected
    await login("10.0.0.2", "d@one.test").expect(302);
  });

  it("limits starting a sign-in per e-mail address, whatever the address it comes from", async () => {
    for (let i = 1; i <= 4; i++) await login(`10.0.1.${i}`, "Hinted@One.test").expect(302);
    const res = await login("10.0.1.9", "hinted@one.test");
    expectTooMany(res);
    expect(res.text).toMatch(/Too many sign-ins were started for this e-mail address\. Try again in/);
  });

  it("limits callbacks per address before talking to the provider", async () => {
    const callback = () => request(app).get("/auth/callback?code=x&state=y").set("X-Forwarded-For", "10.0.2.1");
    for (let i = 0; i < 3; i++) await callback().expect(400);
    const res = await callback();
    expectTooMany(res);
    expect(res.text).toMatch(/Too many sign-ins from your network\. Try again in/);
  });

  it("limits completed sign-ins per e-mail address and opens no session over it", async () => {
    const signIn = async (ip: string) => {
      const start = await login(ip, "engineer@one.test").expect(302);
      const atProvider = await fetch(start.headers.location, { redirect: "manual" });
      const back = new URL(atProvider.headers.get("location")!);
      return request(app)
        .get(back.pathname + back.search)
        .set("X-Forwarded-For", ip)
        .set("Cookie", cookiesOf(start).join("; "));
    };
    await signIn("10.0.3.1").then((r) => expect(r.status).toBe(302));
    await signIn("10.0.3.2").then((r) => expect(r.status).toBe(302));
    const res = await signIn("10.0.3.3");
    expectTooMany(res);
    expect(res.text).toMatch(/Too many sign-ins for this e-mail address\. Try again in/);
    expect(cookiesOf(res).some((c) => c.startsWith("wallcast_session="))).toBe(false);
  });

  it("ignores X-Forwarded-For unless the proxy is trusted", async () => {
    const untrusting = await productionApp({ trustProxy: false });
    const from = (ip: string) => request(untrusting).get("/auth/login").set("X-Forwarded-For", ip);
    // the earlier tests used forwarded addresses; the socket's own address starts afresh
    for (const ip of ["10.9.0.1", "10.9.0.2", "10.9.0.3"]) await from(ip).expect(302);
    expectTooMany(await from("10.9.0.4"));
  });
});

describe("upload and import limits, per person across the three", () => {
  it("counts attachments and lab imports together and answers each in its own way", async () => {
    // an empty lab import is refused (400) but counted
    await request(app).post("/lab-import").set("Cookie", cookies.tech).field("x", "1").expect(400);
    // no such coupon here: 404 before anything is counted
    await request(app)
      .post("/lab/00000000-0000-4000-8000-000000000000/attachments")
      .set("Cookie", cookies.tech)
      .expect(404);
    await request(app).post("/lab-import").set("Cookie", cookies.tech).field("x", "1").expect(400);
    const page = await request(app).post("/lab-import").set("Cookie", cookies.tech).field("x", "1");
    expectTooMany(page);
    expect(page.headers["content-type"]).toMatch(/text\/html/);
    expect(page.text).toMatch(/uploaded or imported many files in a short time\. Try again in \d+ (minutes?|hour)\./);
  });

  it("answers the attachment endpoint with problem+json", async () => {
    const couponId = await w.coupon("RL-1");
    const [exposure] = await db
      .knex("coupon_exposures")
      .insert({
        owner_id: w.owner.id,
        point_id: w.point,
        coupon_id: couponId,
        installed_at: db.knex.raw("now() - interval '91 days'"),
        installed_by: w.users.tech.id,
        installed_by_organisation_id: w.monitoring.id,
        removed_at: db.knex.raw("now() - interval '1 day'"),
        removed_by: w.users.tech.id,
        removed_by_organisation_id: w.monitoring.id,
      })
      .returning("id");
    const res = await request(app)
      .post(`/lab/${exposure.id}/attachments`)
      .set("Cookie", cookies.tech)
      .field("kind", "as_removed")
      .attach("file", Buffer.from("not an image"), { filename: "x.jpg" });
    expectTooMany(res);
    expect(res.headers["content-type"]).toMatch(/application\/problem\+json/);
    expect(res.body).toMatchObject({ status: 429, title: "Too many requests" });
    expect(res.body.detail).toMatch(/Try again in/);
    expect(await db.knex("attachments").count({ n: "*" }).first()).toEqual({ n: "0" });
  });

  it("limits the coupon CSV import per person", async () => {
    const csv = "serial\nRL-2\n";
    const post = () =>
      request(app)
        .post("/setup/coupons")
        .set("Cookie", cookies.engineer)
        .field("intent", "importCsv")
        .field("csv", csv);
    expect((await post()).status).not.toBe(429);
    expect((await post()).status).not.toBe(429);
    const res = await post();
    expectTooMany(res);
    expect(res.text).toMatch(/Try again in \d+ (minutes?|hour)\./);
    // adding one coupon by hand is not an import
    expect(
      (
        await request(app)
          .post("/setup/coupons")
          .set("Cookie", cookies.engineer)
          .field("intent", "createCoupon")
          .field("serial", "")
      ).status,
    ).toBe(400);
  });
});

describe("audit limits", () => {
  it("limits views of the audit trail per person", async () => {
    await request(app).get("/audit").set("Cookie", cookies.admin).expect(200);
    await request(app).get("/audit").set("Cookie", cookies.admin).expect(200);
    const res = await request(app).get("/audit").set("Cookie", cookies.admin);
    expectTooMany(res);
    expect(res.text).toMatch(
      /opened the audit trail many times in a short time\. Try again in \d+ (seconds?|minutes?)\./,
    );
    expect(res.text).toMatch(/<h1[^>]*>Too many requests<\/h1>/);
    // another person still may
    await request(app).get("/audit").set("Cookie", cookies.engineer).expect(200);
  });

  it("limits the audit CSV export per person", async () => {
    await request(app).get("/audit.csv").set("Cookie", cookies.engineer).expect(200);
    const res = await request(app).get("/audit.csv").set("Cookie", cookies.engineer);
    expectTooMany(res);
    expect(res.headers["content-type"]).toMatch(/text\/plain/);
    expect(res.text).toMatch(/downloaded the audit trail many times\. Try again in \d+ (minutes?|hour)\./);
  });
});
