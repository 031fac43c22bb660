import { afterAll, beforeAll, describe, expect, it } from "vitest";
import type { SessionUser } from "~/context";
import { recordExchange } from "~/models/exposures.server";
import { saveLabResult } from "~/models/lab-results.server";
import { getSubmission, submitForReview } from "~/models/submissions.server";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { openBrowser, signIn, startAppProcess, type AppProcess, type Browser } from "../helpers/e2e";
import { buildCouponWorld, type CouponWorld } from "../helpers/e2e-world";
import { createUser, daysAgoAt, type OrganisationRow, type UserRow } from "../helpers/fixtures";
import { sessionCookieFor } from "../helpers/session";

/**
 * Scale-out: two app processes on one database and one object store, as behind a load
 * balancer. A session made through one is honoured by the other; two engineers deciding
 * the same submission through different processes get exactly one approval; a queued
 * e-mail is delivered once although both processes run the mail workers.
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
  [a, b] = await Promise.all([startAppProcess(db), startAppProcess(db)]);
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
    await submitForReview(db.knex, tech, saved.submissionId);
    const { submission, results } = await getSubmission(
      db.knex,
      asSessionUser(world.engineer, world.owner),
      saved.submissionId,
    );

    // Both processes sweep the outbox; each engineer still gets the message once. The
    // submission was made in this process (no queue here), so the minute sweep sends it:
    // pg-boss looks at its schedules every 30 s, so that can take up to 90 s.
    const deadline = Date.now() + 100_000;
    while (Date.now() < deadline && (await mailTo(world.engineer.email, submission.reference)).length === 0)
      await new Promise((r) => setTimeout(r, 500));
    await new Promise((r) => setTimeout(r, 12_000)); // two more sweeps of each process
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
});
