import { afterAll, beforeAll, describe, expect, it } from "vitest";
import type { SessionUser } from "~/context";
import { recordExchange } from "~/models/exposures.server";
import { saveLabResult } from "~/models/lab-results.server";
import { getSubmission } from "~/models/submissions.server";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { couponSubmission } from "../helpers/outcome";
import { openBrowser, signIn, startAppProcess, type AppProcess, type Browser } from "../helpers/e2e";
import { buildCouponWorld, type CouponWorld } from "../helpers/e2e-world";
import { createUser, daysAgoAt, type OrganisationRow, type UserRow } from "../helpers/fixtures";
import { sessionCookieFor } from "../helpers/session";

/**
 * Scale-out: two app processes on one database and one object store, as behind a load
 * balancer. A session made through one is honoured by the other; two engineers deciding
 * the same submission through different processes get exactly one approval; a queued
 * e-mail is delivered once although both processes run the mail workers; a rate limit
 * counts the requests made through both.
 */

let db: TestDatabase;
let a: AppProcess;
let b: AppProcess;
let world: CouponWorld;
let browser: Browser;
let secondEngineer: UserRow;

const asSessionUser = (u: UserRow, org: OrganisationRow): SessionUser => ({
  id: u.id,
  email: u.email,
  name: u.name,
  role: u.role,
  units: "si",
  timeZone: "UTC",
  timeZoneChosen: false,
  organisation: { id: org.id, name: org.name, kind: org.kind },
  sessionIdHash: "two-processes",
});

async function mailTo(address: string, subjectPart: string): Promise<Array<{ subject: string }>> {
  const res = await fetch(`${process.env.FAKE_MAIL_URL}/emails?to=${encodeURIComponent(address)}`);
  const body = (await res.json()) as { data: Array<{ subject: string }> };
  return body.data.filter((m) => m.subject.includes(subjectPart));
}

beforeAll(async () => {
  db = await createTestDatabase();
  // A small audit-view limit, so the test can show that both processes count against one budget.
  const limits = { RATE_LIMITS: "auditViewsPerUser=3/600" };
  [a, b] = await Promise.all([startAppProcess(db, limits), startAppProcess(db, limits)]);
  world = await buildCouponWorld(db.knex, {
    mailDomain: "two-processes.test",
    site: { name: "Eskerfield Cracker Plant", code: "ECP", timeZone: "Europe/Amsterdam" },
    pointTag: "ECP-CH-007",
    plannedExposureDays: 90,
    inServiceDays: 95,
  });
  secondEngineer = await createUser(db.knex, world.owner, {
    email: "engineer2@two-processes.test",
    name: "Ilse Brandvold",
    role: "integrity_engineer",
  });
  browser = await openBrowser();
}, 90_000);
afterAll(async () => {
  await browser?.close();
  await Promise.all([a?.stop(), b?.stop()]);
  await db?.drop();
});

describe("two app processes on one database", () => {
  it("honours through the second process a session signed in through the first", async () => {
    await signIn(browser.page, a.url, world.engineer.email);
    const cookies = await browser.context.cookies(a.url);
    const header = cookies.map((c) => `${c.name}=${c.value}`).join("; ");
    expect(header).toContain("wallcast_session");
    const res = await fetch(`${b.url}/review`, { headers: { Cookie: header }, redirect: "manual" });
    expect(res.status).toBe(200);
    expect(await res.text()).toContain(world.engineer.name);
  });

  it("delivers the queued e-mail once and lets exactly one of two simultaneous approvals win", async () => {
    const tech = asSessionUser(world.tech, world.contractor);
    const removed = await recordExchange(db.knex, tech, world.pointId, { removedAt: daysAgoAt(1) });
    const exposureId = removed.removedExposureId!;
    const saved = await saveLabResult(db.knex, tech, exposureId, {
      cleaningMethod: "inhibited hydrochloric acid",
      couponMassesG: [36.0134],
      finalMassG: null,
      blankInitialMassG: null,
      blankMassesG: [],
      baseMetalFromCycle: null,
      pitDepthsMm: [],
      labNotes: "",
    });
    // Sent through the first process, as the technician's browser would: it queues the e-mails.
    const sent = await fetch(`${a.url}/submissions/${saved.submissionId}`, {
      method: "POST",
      headers: {
        Cookie: await sessionCookieFor(db.knex, world.tech.id),
        "Content-Type": "application/x-www-form-urlencoded",
      },
      body: new URLSearchParams({ intent: "submit" }).toString(),
      redirect: "manual",
    });
    expect(sent.status).toBe(302);
    const { submission, results } = await couponSubmission(
      getSubmission(db.knex, asSessionUser(world.engineer, world.owner), saved.submissionId),
    );

    // Both processes sweep the outbox; each engineer still gets the message once.
    const deadline = Date.now() + 100_000;
    while (Date.now() < deadline && (await mailTo(world.engineer.email, submission.reference)).length === 0)
      await new Promise((r) => setTimeout(r, 500));
    await new Promise((r) => setTimeout(r, 8_000)); // both processes keep polling meanwhile
    expect(await mailTo(world.engineer.email, submission.reference)).toHaveLength(1);
    expect(await mailTo(secondEngineer.email, submission.reference)).toHaveLength(1);

    const form = new URLSearchParams({ intent: "approve", version: String(submission.version), confirm: "on" });
    for (const r of results)
      for (const f of r.computed.flags)
        if (f.severity === "warning") form.set(`ack.${r.id}.${f.code}`, "Checked against the lab sheet.");
    const post = async (app: AppProcess, userId: string) =>
      fetch(`${app.url}/review/${submission.id}`, {
        method: "POST",
        headers: {
          Cookie: await sessionCookieFor(db.knex, userId),
          "Content-Type": "application/x-www-form-urlencoded",
        },
        body: form.toString(),
        redirect: "manual",
      });
    const [viaA, viaB] = await Promise.all([post(a, world.engineer.id), post(b, secondEngineer.id)]);
    expect([viaA.status, viaB.status].sort()).toEqual([302, 409]);
    const approvals = await db
      .knex("audit_events")
      .where({ record_id: submission.id, action: "submission.approved" })
      .count<Array<{ n: string }>>({ n: "*" });
    expect(Number(approvals[0].n)).toBe(1);
    expect((await db.knex("submissions").where({ id: submission.id }).first("status")).status).toBe("approved");
  }, 150_000);

  it("counts a rate limit across both processes", async () => {
    const cookie = await sessionCookieFor(db.knex, world.engineer.id);
    const view = (app: AppProcess) => fetch(`${app.url}/audit`, { headers: { Cookie: cookie }, redirect: "manual" });
    // Three views allowed in ten minutes: two through the first process, one through the second…
    expect([(await view(a)).status, (await view(b)).status, (await view(a)).status]).toEqual([200, 200, 200]);
    // …and the fourth is refused, through either.
    const refused = await view(b);
    expect(refused.status).toBe(429);
    expect(Number(refused.headers.get("Retry-After"))).toBeGreaterThan(0);
    expect((await view(a)).status).toBe(429);
  });
});
