import type { Express } from "express";
import request from "supertest";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { subjectForEmail } from "../../fake-services/idp";
import { productionApp, shutdownApp } from "../helpers/app";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld } from "../helpers/fixtures";
import { sessionCookieFor } from "../helpers/session";
import { decideSignIn } from "~/models/sign-in.server";

/** A page's words without its markup (tags and references are kept on one line with spans). */
const words = (html: string) => html.replace(/<[^>]+>/g, "");

/**
 * The identity a first sign-in binds (issuer and subject), the refusal of another
 * provider account with the same address, the administrator's reset, the audit events of
 * every sign-in, and the OpenID Connect details: nonce, the used state cookie, sign-out
 * at the provider.
 */
let db: TestDatabase;
let app: Express;
let w: Awaited<ReturnType<typeof buildWorld>>;
let adminCookie: string;
const issuer = process.env.OIDC_ISSUER!.replace(/\/$/, "");

beforeAll(async () => {
  db = await createTestDatabase();
  process.env.DATABASE_URL = db.url;
  w = await buildWorld(db.knex);
  await db.knex("users").where({ id: w.users.tech.id }).update({ invited_by_organisation_id: w.owner.id });
  app = await productionApp();
  adminCookie = await sessionCookieFor(db.knex, w.users.admin.id);
});
afterAll(async () => {
  await shutdownApp();
  await db?.drop();
});

const setCookies = (res: request.Response) => (res.headers["set-cookie"] as unknown as string[] | undefined) ?? [];
const cookiesOf = (res: request.Response) =>
  setCookies(res)
    .map((c) => c.split(";")[0])
    .filter((c) => !c.endsWith("="));

/** /auth/login → the provider (its authorization URL changed by `tamper`) → the callback's answer. */
async function signIn(email: string, tamper: (authorize: URL) => void = () => {}) {
  const login = await request(app)
    .get(`/auth/login?login_hint=${encodeURIComponent(email)}`)
    .expect(302);
  const authorize = new URL(login.headers.location);
  tamper(authorize);
  const atProvider = await fetch(authorize, { redirect: "manual" });
  const back = new URL(atProvider.headers.get("location")!);
  const done = await request(app)
    .get(back.pathname + back.search)
    .set("Cookie", cookiesOf(login).join("; "));
  return { login, authorize, done, session: cookiesOf(done).find((c) => c.startsWith("wallcast_session=")) };
}

const userRow = (email: string) =>
  db.knex("users").where({ email }).first("id", "idp_issuer", "idp_subject", "identity_bound_at", "status");
const eventsFor = (userId: string) =>
  db
    .knex("audit_events")
    .where({ record_type: "user", record_id: userId })
    .orderBy("id")
    .select("owner_id", "action", "actor_label", "before", "after");

describe("the identity a first sign-in binds", () => {
  it("binds the provider's issuer and subject and audits the sign-in", async () => {
    expect(await userRow("engineer@one.test")).toMatchObject({ idp_issuer: null, idp_subject: null });
    const first = await signIn("engineer@one.test");
    expect(first.done.status).toBe(302);
    expect(first.session).toBeTruthy();
    const row = await userRow("engineer@one.test");
    expect(row).toMatchObject({ idp_issuer: issuer, idp_subject: subjectForEmail("engineer@one.test") });
    expect(row!.identity_bound_at).toBeInstanceOf(Date);

    const again = await signIn("engineer@one.test");
    expect(again.session).toBeTruthy();
    const events = await eventsFor(w.users.engineer.id);
    expect(events.map((e) => e.action)).toEqual(["member.identity_bound", "sign_in.admitted", "sign_in.admitted"]);
    expect(events[0]).toMatchObject({
      owner_id: w.owner.id,
      actor_label: "engineer@one.test",
      before: { issuer: null, subject: null },
      after: { issuer, subject: subjectForEmail("engineer@one.test") },
    });
  });

  it("refuses the same address from another subject or issuer, with the reason, and audits it", async () => {
    await signIn("manager@one.test");
    const subject = subjectForEmail("manager@one.test");
    for (const bound of [
      { idp_issuer: issuer, idp_subject: "user-an-earlier-account" },
      { idp_issuer: "https://another-provider.example", idp_subject: subject },
    ]) {
      await db.knex("users").where({ email: "manager@one.test" }).update(bound);
      const { done, session } = await signIn("manager@one.test");
      expect(done.status).toBe(302);
      expect(done.headers.location).toBe("/auth/no-access?reason=identity");
      expect(session).toBeUndefined();
      const page = await request(app).get(done.headers.location).expect(403);
      expect(words(page.text)).toMatch(/This address is bound to another sign-in account/);
      expect(words(page.text)).toMatch(/ask your organisation’s Wallcast administrator to reset your sign-in identity/);
      // the binding stays as it was
      expect(await userRow("manager@one.test")).toMatchObject(bound);
    }
    const refusals = (await eventsFor(w.users.manager.id)).filter((e) => e.action === "sign_in.refused");
    expect(refusals).toEqual([
      expect.objectContaining({
        owner_id: w.owner.id,
        before: { issuer, subject: "user-an-earlier-account" },
        after: { email: "manager@one.test", refusal: "identity_mismatch", issuer, subject },
      }),
      expect.objectContaining({
        before: { issuer: "https://another-provider.example", subject },
        after: { email: "manager@one.test", refusal: "identity_mismatch", issuer, subject },
      }),
    ]);
  });

  it("shows the refusal to an administrator, who resets the binding so the next sign-in binds again", async () => {
    const people = await request(app).get("/admin/members").set("Cookie", adminCookie).expect(200);
    expect(words(people.text)).toMatch(/Sign-in with another identity-provider account refused/);
    const audit = await request(app).get("/audit").set("Cookie", adminCookie).expect(200);
    expect(words(audit.text)).toMatch(/sign-in refused/);

    await request(app)
      .post("/admin/members")
      .set("Cookie", adminCookie)
      .type("form")
      .send({ intent: "resetIdentity", userId: w.users.manager.id })
      .expect(302);
    expect(await userRow("manager@one.test")).toMatchObject({
      idp_issuer: null,
      idp_subject: null,
      identity_bound_at: null,
    });
    const reset = (await eventsFor(w.users.manager.id)).find((e) => e.action === "member.identity_reset");
    expect(reset).toMatchObject({
      actor_label: "admin@one.test",
      before: { email: "manager@one.test", issuer: "https://another-provider.example" },
      after: { email: "manager@one.test", issuer: null, subject: null },
    });
    const after = await request(app).get("/admin/members").set("Cookie", adminCookie).expect(200);
    expect(words(after.text)).not.toMatch(/Sign-in with another identity-provider account refused/);

    const { session } = await signIn("manager@one.test");
    expect(session).toBeTruthy();
    expect(await userRow("manager@one.test")).toMatchObject({
      idp_issuer: issuer,
      idp_subject: subjectForEmail("manager@one.test"),
    });
  });

  it("lets no administrator reset their own identity, nor another owner's people", async () => {
    await signIn("admin@one.test");
    const own = await request(app)
      .post("/admin/members")
      .set("Cookie", adminCookie)
      .type("form")
      .send({ intent: "resetIdentity", userId: w.users.admin.id })
      .expect(400);
    expect(words(own.text)).toMatch(/You cannot reset your own sign-in identity/);
    await request(app)
      .post("/admin/members")
      .set("Cookie", adminCookie)
      .type("form")
      .send({ intent: "resetIdentity", userId: w.users.engineer2.id })
      .expect(404);
    const engineerCookie = await sessionCookieFor(db.knex, w.users.engineer.id);
    await request(app)
      .post("/admin/members")
      .set("Cookie", engineerCookie)
      .type("form")
      .send({ intent: "resetIdentity", userId: w.users.manager.id })
      .expect(403);
    expect(await userRow("admin@one.test")).toMatchObject({ idp_subject: subjectForEmail("admin@one.test") });
  });

  it("refuses a provider account that is bound to another person", async () => {
    await db
      .knex("users")
      .where({ email: "tech@inspection.test" })
      .update({ idp_issuer: issuer, idp_subject: subjectForEmail("tech@monitoring.test") });
    const { done } = await signIn("tech@monitoring.test");
    expect(done.headers.location).toBe("/auth/no-access?reason=identity");
    expect(await userRow("tech@monitoring.test")).toMatchObject({ idp_subject: null, status: "active" });
    // a technician's sign-ins are in the trail of the owner that invited them
    const events = await eventsFor(w.users.tech.id);
    expect(events).toEqual([
      expect.objectContaining({
        owner_id: w.owner.id,
        action: "sign_in.refused",
        after: expect.objectContaining({ refusal: "identity_in_use" }),
      }),
    ]);
  });

  it("binds one provider account to one person when two sign in with it at the same instant", async () => {
    // Two people with no binding yet present the same provider account together: the
    // unique index lets one bind and the other is refused, never a server error.
    const emails = ["engineer@one.test", "manager@one.test"];
    const before = await db.knex("users").whereIn("email", emails).select("email", "idp_issuer", "idp_subject");
    await db.knex("users").whereIn("email", emails).update({ idp_issuer: null, idp_subject: null });
    const shared = { issuer, subject: "shared-account", email: "", emailVerified: true, name: "" };
    const outcomes = await Promise.all(emails.map((email) => decideSignIn(db.knex, { ...shared, email })));
    expect(outcomes.map((o) => o.admitted).sort()).toEqual([false, true]);
    expect(outcomes.find((o) => !o.admitted)).toMatchObject({ reason: "identity" });
    const holders = await db.knex("users").where({ idp_subject: "shared-account" }).select("email");
    expect(holders).toHaveLength(1);
    for (const b of before)
      await db.knex("users").where({ email: b.email }).update({ idp_issuer: b.idp_issuer, idp_subject: b.idp_subject });
  });

  it("audits the refused sign-in of a disabled person", async () => {
    await db.knex("users").where({ id: w.users.inspector.id }).update({ status: "disabled" });
    await db.knex("users").where({ id: w.users.inspector.id }).update({ invited_by_organisation_id: w.owner.id });
    const { done } = await signIn("tech@inspection.test");
    expect(done.headers.location).toBe("/auth/no-access?reason=disabled");
    expect((await eventsFor(w.users.inspector.id)).map((e) => [e.action, e.after.refusal])).toEqual([
      ["sign_in.refused", "person_disabled"],
    ]);
  });
});

describe("OpenID Connect details", () => {
  it("sends a nonce and refuses an id_token that carries another", async () => {
    const good = await signIn("engineer@one.test");
    expect(good.authorize.searchParams.get("nonce")).toMatch(/^[A-Za-z0-9_-]{43}$/);
    const other = await signIn("engineer@one.test");
    expect(other.authorize.searchParams.get("nonce")).not.toBe(good.authorize.searchParams.get("nonce"));

    const tampered = await signIn("engineer@one.test", (u) =>
      u.searchParams.set("nonce", "a-nonce-of-another-sign-in"),
    );
    expect(tampered.done.status).toBe(400);
    expect(tampered.done.text).toMatch(/could not be completed/);
    expect(tampered.session).toBeUndefined();
    const missing = await signIn("engineer@one.test", (u) => u.searchParams.delete("nonce"));
    expect(missing.done.status).toBe(400);
  });

  it("clears the state cookie the sign-in used, by its real name, and keeps the others", async () => {
    const first = await request(app).get("/auth/login?login_hint=engineer%40one.test").expect(302);
    const second = await request(app).get("/auth/login?login_hint=engineer%40one.test").expect(302);
    const stateCookie = (res: request.Response) => cookiesOf(res).find((c) => c.startsWith("wallcast_oidc:"))!;
    expect(stateCookie(first)).toMatch(/^wallcast_oidc:[0-9a-f-]{36}=/);
    const name = stateCookie(first).split("=")[0];
    const atProvider = await fetch(first.headers.location, { redirect: "manual" });
    const back = new URL(atProvider.headers.get("location")!);
    const done = await request(app)
      .get(back.pathname + back.search)
      .set("Cookie", [stateCookie(first), stateCookie(second)].join("; "))
      .expect(302);
    const cleared = setCookies(done).filter((c) => c.startsWith("wallcast_oidc:"));
    expect(cleared).toEqual([`${name}=; Path=/auth; Max-Age=0; HttpOnly; SameSite=Lax`]);
    // a failed callback (a forged code) clears its own too
    const secondBack = new URL((await fetch(second.headers.location, { redirect: "manual" })).headers.get("location")!);
    const forged = await request(app)
      .get(secondBack.pathname + secondBack.search.replace(/code=[^&]+/, "code=forged"))
      .set("Cookie", stateCookie(second))
      .expect(400);
    expect(setCookies(forged).filter((c) => c.startsWith("wallcast_oidc:"))).toEqual([
      `${stateCookie(second).split("=")[0]}=; Path=/auth; Max-Age=0; HttpOnly; SameSite=Lax`,
    ]);
  });

  it("ends the provider's session at sign-out, which sends the browser back to the start page", async () => {
    const { session } = await signIn("engineer@one.test");
    const out = await request(app).post("/auth/logout").set("Cookie", session!).expect(302);
    const target = new URL(out.headers.location);
    expect(`${target.origin}${target.pathname}`).toBe(`${issuer}/endsession`);
    expect(target.searchParams.get("client_id")).toBe("wallcast");
    const origin = "http://127.0.0.1:3000";
    expect(target.searchParams.get("post_logout_redirect_uri")).toBe(`${origin}/`);
    expect(setCookies(out).some((c) => /^wallcast_flash=[^;]+/.test(c))).toBe(true);
    await request(app).get("/api/v1/me").set("Cookie", session!).expect(401);

    const atProvider = await fetch(target, { redirect: "manual" });
    expect(atProvider.status).toBe(302);
    expect(atProvider.headers.get("location")).toBe(`${origin}/`);
  });

  it("has the provider refuse a sign-out return address without the client", async () => {
    const url = new URL(`${issuer}/endsession`);
    url.searchParams.set("post_logout_redirect_uri", "http://127.0.0.1:3000/");
    const bare = await fetch(url, { redirect: "manual" });
    expect(bare.status).toBe(400);
    url.searchParams.set("id_token_hint", "not-a-token");
    expect((await fetch(url, { redirect: "manual" })).status).toBe(400);
  });
});
