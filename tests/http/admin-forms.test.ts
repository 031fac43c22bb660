import type { Express } from "express";
import request from "supertest";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { productionApp, shutdownApp } from "../helpers/app";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, type World } from "../helpers/fixtures";
import { sessionCookieFor } from "../helpers/session";

/** The administration forms through the real request handler: the one form idiom end to end. */

let db: TestDatabase;
let app: Express;
let w: World;
let admin: string;
let engineer: string;
let foreignEngineer: string;

/** A form body as the browser sends it (a tick box sends a hidden "off", then "on" when ticked). */
const body = (fields: Array<[string, string]>) => new URLSearchParams(fields).toString();
const ticked = (list: string, value: string): Array<[string, string]> => [
  [`${list}.${value}`, "off"],
  [`${list}.${value}`, "on"],
];
const unticked = (list: string, value: string): Array<[string, string]> => [[`${list}.${value}`, "off"]];

beforeAll(async () => {
  db = await createTestDatabase();
  process.env.DATABASE_URL = db.url;
  app = await productionApp();
  w = await buildWorld(db.knex);
  admin = await sessionCookieFor(db.knex, w.users.admin.id);
  engineer = await sessionCookieFor(db.knex, w.users.engineer.id);
  foreignEngineer = await sessionCookieFor(db.knex, w.users.engineer2.id);
});
afterAll(async () => {
  await shutdownApp();
  await db?.drop();
});

describe("contracts", () => {
  it("keeps what was typed and names each field on a refused new contract", async () => {
    const before = await db.knex("contracts").count<Array<{ n: string }>>({ n: "*" });
    const res = await request(app)
      .post("/contracts/new")
      .set("Cookie", admin)
      .type("form")
      .send(
        body([
          ["contractorId", w.monitoring.id],
          ["newContractorName", ""],
          ["reference", "  "],
          ...ticked("siteIds", w.site.id),
          ...unticked("siteIds", w.site2.id),
          ["startsOn", "2026-02-30"],
          ["endsOn", ""],
        ]),
      )
      .expect(400);
    expect(res.text).toContain("Type the contract or purchase-order reference.");
    expect(res.text).toContain("real calendar date");
    expect(res.text).toContain("at least one kind of work");
    expect(res.text).toContain('value="2026-02-30"');
    expect(res.text).toMatch(/fields need/);
    expect((await db.knex("contracts").count<Array<{ n: string }>>({ n: "*" }))[0].n).toBe(before[0].n);
  });

  it("saves a new contract from the ticked boxes and redirects to it; an edit unticks a site", async () => {
    const created = await request(app)
      .post("/contracts/new")
      .set("Cookie", admin)
      .type("form")
      .send(
        body([
          ["contractorId", w.monitoring.id],
          ["reference", "HTTP-FORM-1"],
          ...ticked("siteIds", w.site.id),
          ...ticked("siteIds", w.site2.id),
          ...ticked("scope", "coupon_monitoring"),
          ...unticked("scope", "thickness_inspection"),
          ["startsOn", w.today],
          ["endsOn", ""],
        ]),
      )
      .expect(302);
    const row = await db.knex("contracts").where({ reference: "HTTP-FORM-1" }).first("id", "scope");
    expect(created.headers.location).toBe(`/contracts/${row.id}`);
    expect(row.scope).toEqual(["coupon_monitoring"]);
    const sites = await db.knex("contract_sites").where({ contract_id: row.id }).pluck("site_id");
    expect(sites.sort()).toEqual([w.site.id, w.site2.id].sort());

    await request(app)
      .post(`/contracts/${row.id}`)
      .set("Cookie", admin)
      .type("form")
      .send(
        body([
          ["intent", "update"],
          ...ticked("siteIds", w.site.id),
          ...unticked("siteIds", w.site2.id),
          ...ticked("scope", "coupon_monitoring"),
          ["startsOn", w.today],
          ["endsOn", ""],
        ]),
      )
      .expect(302);
    expect(await db.knex("contract_sites").where({ contract_id: row.id }).pluck("site_id")).toEqual([w.site.id]);

    // an impossible end keeps the end form's words and value; the page is still the contract's
    const end = await request(app)
      .post(`/contracts/${row.id}`)
      .set("Cookie", admin)
      .type("form")
      .send(
        body([
          ["intent", "end"],
          ["endsOn", "1999-01-01"],
          ["reason", "typed reason"],
        ]),
      )
      .expect(400);
    expect(end.text).toContain("its last day cannot be before that");
    expect(end.text).toContain('value="typed reason"');

    // an end sent from a page showing an older version is a 409 that says so and offers a reload
    const page = await request(app).get(`/contracts/${row.id}`).set("Cookie", admin).expect(200);
    const shown = /name="version" value="(\d+)"/.exec(page.text)![1];
    await db.knex("contracts").where({ id: row.id }).increment("version", 1);
    const stale = await request(app)
      .post(`/contracts/${row.id}`)
      .set("Cookie", admin)
      .type("form")
      .send(
        body([
          ["intent", "end"],
          ["endsOn", w.shift(-1)],
          ["version", shown],
        ]),
      )
      .expect(409);
    expect(stale.text).toContain("was changed by someone else after you opened this page");
    expect(stale.text).toContain("Reload this page");

    const unknown = await request(app)
      .post(`/contracts/${row.id}`)
      .set("Cookie", admin)
      .type("form")
      .send(body([["intent", "delete"]]))
      .expect(400);
    expect(unknown.text).toContain("This form does not do that.");
  });

  it("answers another owner's contract with a 404 inside the app layout, and an engineer's change with a 403", async () => {
    const [contract] = await db.knex("contracts").where({ owner_id: w.owner.id }).pluck("id");
    const missing = await request(app).get(`/contracts/${contract}`).set("Cookie", foreignEngineer).expect(404);
    expect(missing.text).toContain("Not found");
    expect(missing.text).toContain("Skip to content"); // the app's shell is around the message
    expect(missing.text).toContain('href="/contracts"');

    const refused = await request(app)
      .post(`/contracts/${contract}`)
      .set("Cookie", engineer)
      .type("form")
      .send(
        body([
          ["intent", "end"],
          ["endsOn", w.today],
        ]),
      )
      .expect(403);
    expect(refused.text).toContain("Not allowed");
  });
});

describe("API clients", () => {
  it("keeps the name on a refused client, and shows a new token once, uncached", async () => {
    const refused = await request(app)
      .post("/admin/api-clients")
      .set("Cookie", admin)
      .type("form")
      .send(body([["intent", "create"], ["name", "Typed LIMS"], ...unticked("scopes", "lims:write")]))
      .expect(400);
    expect(refused.text).toContain("Tick at least one permission.");
    expect(refused.text).toContain('value="Typed LIMS"');

    const created = await request(app)
      .post("/admin/api-clients")
      .set("Cookie", admin)
      .type("form")
      .send(body([["intent", "create"], ["name", "Plant LIMS"], ...ticked("scopes", "lims:write")]))
      .expect(200);
    expect(created.headers["cache-control"]).toBe("no-store");
    expect(created.text).toMatch(/wct_[A-Za-z0-9_-]{43}/);
    expect(await db.knex("api_clients").where({ name: "Plant LIMS" }).first("scopes")).toEqual({
      scopes: ["lims:write"],
    });

    await request(app)
      .post("/admin/api-clients")
      .set("Cookie", admin)
      .type("form")
      .send(
        body([
          ["intent", "revoke"],
          ["clientId", "00000000-0000-4000-8000-000000000000"],
        ]),
      )
      .expect(404);
  });
});

describe("people", () => {
  it("names a taken address on the invite form with what was typed, and invites a technician", async () => {
    const refused = await request(app)
      .post("/admin/members")
      .set("Cookie", admin)
      .type("form")
      .send(
        body([
          ["intent", "invite"],
          ["email", "engineer@one.test"],
          ["name", "Typed Name"],
          ["access", "plant_manager"],
        ]),
      )
      .expect(400);
    expect(refused.text).toContain("engineer@one.test is already on your list of people.");
    expect(refused.text).toContain('value="Typed Name"');

    const noCompany = await request(app)
      .post("/admin/members")
      .set("Cookie", admin)
      .type("form")
      .send(
        body([
          ["intent", "invite"],
          ["email", "x@y.test"],
          ["name", "X"],
          ["access", ""],
        ]),
      )
      .expect(400);
    expect(noCompany.text).toContain("Choose what this person does.");

    const invited = await request(app)
      .post("/admin/members")
      .set("Cookie", admin)
      .type("form")
      .send(
        body([
          ["intent", "invite"],
          ["email", "new.tech@monitoring.test"],
          ["name", "New Tech"],
          ["access", `technician:${w.monitoring.id}`],
        ]),
      )
      .expect(302);
    expect(invited.headers.location).toBe("/admin/members");
    expect(
      await db.knex("users").where({ email: "new.tech@monitoring.test" }).first("organisation_id", "role"),
    ).toEqual({
      organisation_id: w.monitoring.id,
      role: "contractor_technician",
    });
    // exactly one invitation e-mail, to that address, with who, where, as what and the sign-in link
    const mail = await db.knex("email_outbox").where("event_key", "like", "member.invited:%").select("*");
    expect(mail.map((m) => m.to_email)).toEqual(["new.tech@monitoring.test"]);
    expect(mail[0].subject).toBe("admin of Owner One invited you to Wallcast for Monitoring Co");
    expect(mail[0].text).toContain(
      "admin of Owner One invited you to Wallcast as a contractor technician of Monitoring Co, a contractor Owner One has engaged.",
    );
    expect(mail[0].text).toMatch(
      /Sign in to Wallcast: http:\/\/[^/\s]+\/auth\/login\?login_hint=new\.tech%40monitoring\.test\n/,
    );
  });

  it("says a refused row change above the table, and answers a foreign person with 404", async () => {
    const self = await request(app)
      .post("/admin/members")
      .set("Cookie", admin)
      .type("form")
      .send(
        body([
          ["intent", "disable"],
          ["userId", w.users.admin.id],
        ]),
      )
      .expect(400);
    expect(self.text).toContain("You cannot disable yourself. Ask another administrator.");

    await request(app)
      .post("/admin/members")
      .set("Cookie", admin)
      .type("form")
      .send(
        body([
          ["intent", "role"],
          ["userId", w.users.engineer2.id],
          ["role", "plant_manager"],
        ]),
      )
      .expect(404);
  });
});

describe("the reader's time zone", () => {
  it("defaults to the owner's first site, is chosen on the profile, and governs the audit trail and people", async () => {
    // The world's first site is Plant A in America/Chicago.
    const page = await request(app).get("/profile").set("Cookie", admin).expect(200);
    expect(page.text).toContain("in America/Chicago (the default)");

    const refused = await request(app)
      .post("/profile")
      .set("Cookie", admin)
      .type("form")
      .send(
        body([
          ["intent", "timeZone"],
          ["timeZone", "Mars/Olympus_Mons"],
        ]),
      )
      .expect(400);
    expect(refused.text).toContain("Choose a time zone from the list.");
    expect((await db.knex("users").where({ id: w.users.admin.id }).first("time_zone")).time_zone).toBeNull();

    await request(app)
      .post("/profile")
      .set("Cookie", admin)
      .type("form")
      .send(
        body([
          ["intent", "timeZone"],
          ["timeZone", "europe/london"],
        ]),
      )
      .expect(302);
    expect((await db.knex("users").where({ id: w.users.admin.id }).first("time_zone")).time_zone).toBe("Europe/London");

    const audit = await request(app).get("/audit").set("Cookie", admin).expect(200);
    expect(audit.text).toContain("Times in <!-- -->Europe/London");
    const people = await request(app).get("/admin/members").set("Cookie", admin).expect(200);
    expect(people.text).toContain("Last signed in (Europe/London)");

    await request(app)
      .post("/profile")
      .set("Cookie", admin)
      .type("form")
      .send(
        body([
          ["intent", "timeZone"],
          ["timeZone", ""],
        ]),
      )
      .expect(302);
    expect((await db.knex("users").where({ id: w.users.admin.id }).first("time_zone")).time_zone).toBeNull();
  });
});
