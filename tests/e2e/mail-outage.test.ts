import { mkdtempSync, rmSync } from "node:fs";
import { freePort } from "../helpers/ports";
import os from "node:os";
import path from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import type { SessionUser } from "~/context";
import { recordExchange } from "~/models/exposures.server";
import { saveLabResult } from "~/models/lab-results.server";
import { getSubmission } from "~/models/submissions.server";
import { startMail, type MailHandle } from "../../fake-services/mail";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { couponSubmission } from "../helpers/outcome";
import { startAppProcess, type AppProcess } from "../helpers/e2e";
import { buildCouponWorld, type CouponWorld } from "../helpers/e2e-world";
import { daysAgoAt, type OrganisationRow, type UserRow } from "../helpers/fixtures";
import { sessionCookieFor } from "../helpers/session";

/**
 * The mail service out for a while. The app process sends to a mail fake of this file,
 * on a port that is closed while the service is "down". Notifications of a submission's
 * whole round (submitted, returned, submitted again, approved) are caused through the
 * real forms while it is down; delivery fails and is retried (first retry after 1 s,
 * doubling); once the service is back every message arrives exactly once, and the
 * outbox counts the attempts. Then, with one retry only, a message that runs out of
 * retries stays in the outbox, unsent, with its attempts and the last error.
 */

let db: TestDatabase;
let world: CouponWorld;
let app: AppProcess | undefined;
let mail: MailHandle | undefined;
let mailPort: number;
let mailDir: string;

const mailUp = async () => {
  mail = await startMail({ host: "127.0.0.1", port: mailPort, dataDir: mailDir });
};
const mailDown = async () => {
  await mail?.stop();
  mail = undefined;
};
const startApp = (retryLimit: number) =>
  startAppProcess(db, {
    RESEND_BASE_URL: `http://127.0.0.1:${mailPort}`,
    MAIL_RETRY_LIMIT: String(retryLimit),
    MAIL_RETRY_DELAY_SECONDS: "1",
    LOG_REQUESTS: "false",
  });

const asSessionUser = (u: UserRow, org: OrganisationRow): SessionUser => ({
  id: u.id,
  email: u.email,
  name: u.name,
  role: u.role,
  units: "si",
  timeZone: "UTC",
  timeZoneChosen: false,
  organisation: { id: org.id, name: org.name, kind: org.kind },
  sessionIdHash: "mail-outage",
});

type OutboxRow = {
  id: string;
  event_key: string;
  to_email: string;
  subject: string;
  attempts: number;
  last_error: string | null;
  sent_at: Date | null;
  provider_id: string | null;
};
const outbox = (): Promise<OutboxRow[]> =>
  db
    .knex("email_outbox")
    .orderBy("created_at")
    .select("id", "event_key", "to_email", "subject", "attempts", "last_error", "sent_at", "provider_id");

/** The queue's delivery jobs, for a failing wait's message. */
const deliveryJobs = () =>
  db
    .knex("pgboss.job")
    .where({ name: "mail.deliver" })
    .orderBy("created_on")
    .select("singleton_key", "state", "retry_count", "retry_limit", "start_after", "output");

async function until<T>(what: string, read: () => Promise<T>, ok: (v: T) => boolean, ms = 60_000): Promise<T> {
  const deadline = Date.now() + ms;
  for (;;) {
    const v = await read();
    if (ok(v)) return v;
    if (Date.now() > deadline)
      throw new Error(
        `${what} did not happen within ${ms} ms: ${JSON.stringify(v)}\njobs: ${JSON.stringify(await deliveryJobs())}\n${app?.output().slice(-3000)}`,
      );
    await new Promise((r) => setTimeout(r, 200));
  }
}

/** Messages in the fake inbox, counted per recipient and subject. */
async function inboxCounts(): Promise<Map<string, number>> {
  const res = await fetch(`http://127.0.0.1:${mailPort}/emails?limit=1000`);
  const body = (await res.json()) as { data: Array<{ to: string[]; subject: string }> };
  const counts = new Map<string, number>();
  for (const m of body.data)
    for (const to of m.to) counts.set(`${to} | ${m.subject}`, (counts.get(`${to} | ${m.subject}`) ?? 0) + 1);
  return counts;
}

async function post(path: string, userId: string, form: Record<string, string>): Promise<number> {
  const res = await fetch(`${app!.url}${path}`, {
    method: "POST",
    headers: { Cookie: await sessionCookieFor(db.knex, userId), "Content-Type": "application/x-www-form-urlencoded" },
    body: new URLSearchParams(form).toString(),
    redirect: "manual",
  });
  await res.text();
  return res.status;
}

beforeAll(async () => {
  mailPort = await freePort();
  mailDir = mkdtempSync(path.join(os.tmpdir(), "wallcast-mail-outage-"));
  db = await createTestDatabase();
  world = await buildCouponWorld(db.knex, {
    mailDomain: "mail-outage.test",
    site: { name: "Harrowgate Terminal", code: "HGT", timeZone: "Europe/Oslo" },
    pointTag: "HGT-CH-004",
    plannedExposureDays: 90,
    inServiceDays: 95,
  });
}, 90_000);
afterAll(async () => {
  await app?.stop();
  await mailDown();
  await db?.drop();
  rmSync(mailDir, { recursive: true, force: true });
});

describe("the mail service down for a while", () => {
  it("delivers every notification exactly once after the outage, counting the attempts", async () => {
    app = await startApp(10);
    const tech = asSessionUser(world.tech, world.contractor);
    const engineer = asSessionUser(world.engineer, world.owner);
    const removed = await recordExchange(db.knex, tech, world.pointId, { removedAt: daysAgoAt(1) });
    const saved = await saveLabResult(db.knex, tech, removed.removedExposureId!, {
      cleaningMethod: "inhibited hydrochloric acid",
      couponMassesG: [36.0134],
      finalMassG: null,
      blankInitialMassG: null,
      blankMassesG: [],
      baseMetalFromCycle: null,
      pitDepthsMm: [],
      labNotes: "",
    });
    const id = saved.submissionId;

    // The mail service is down (its port is closed) for the whole round.
    expect(await post(`/submissions/${id}`, world.tech.id, { intent: "submit" })).toBe(302);
    let { submission } = await getSubmission(db.knex, engineer, id);
    expect(
      await post(`/review/${id}`, world.engineer.id, {
        intent: "return",
        version: String(submission.version),
        comment: "Weigh the coupon again; the mass looks high.",
      }),
    ).toBe(302);
    expect(
      await post(`/submissions/${id}`, world.tech.id, { intent: "submit", reply: "Weighed again; same mass." }),
    ).toBe(302);
    const current = await couponSubmission(getSubmission(db.knex, engineer, id));
    submission = current.submission;
    const approval: Record<string, string> = { intent: "approve", version: String(submission.version), confirm: "on" };
    for (const r of current.results)
      for (const f of r.computed.flags)
        if (f.severity === "warning") approval[`ack.${r.id}.${f.code}`] = "Checked against the lab sheet.";
    expect(await post(`/review/${id}`, world.engineer.id, approval)).toBe(302);

    // Every message has failed at least twice (first try and a retry), none is sent.
    const failing = await until(
      "two failed attempts of every message",
      outbox,
      (rows) => rows.length > 0 && rows.every((r) => r.attempts >= 2),
    );
    const kinds = new Set(failing.map((r) => r.event_key.split(":")[0]));
    expect([...kinds].sort()).toEqual(["submission.approved", "submission.returned", "submission.submitted"]);
    expect(failing.filter((r) => r.event_key.startsWith("submission.submitted")).length).toBeGreaterThanOrEqual(2);
    for (const r of failing) {
      expect(r.sent_at).toBeNull();
      expect(r.last_error).toMatch(/\S/);
    }

    // The service comes back: the retries deliver each message once.
    await mailUp();
    const sent = await until("delivery of every message", outbox, (rows) => rows.every((r) => r.sent_at !== null));
    expect(sent.map((r) => r.id).sort()).toEqual(failing.map((r) => r.id).sort());
    for (const r of sent) expect(r.attempts).toBeGreaterThanOrEqual(3);
    // A few more seconds of workers and sweeps send nothing twice.
    await new Promise((r) => setTimeout(r, 4_000));
    const counts = await inboxCounts();
    // Each outbox message once: the two revisions' "submitted" notices share a subject, so
    // a recipient and subject is expected as often as the outbox holds it.
    const expected = new Map<string, number>();
    for (const r of sent)
      expected.set(`${r.to_email} | ${r.subject}`, (expected.get(`${r.to_email} | ${r.subject}`) ?? 0) + 1);
    expect(new Map([...counts].sort())).toEqual(new Map([...expected].sort()));
    expect([...counts.values()].reduce((a, b) => a + b, 0)).toBe(sent.length);
    expect(new Set(sent.map((r) => r.provider_id)).size).toBe(sent.length);
    await app.stop();
    app = undefined;
  }, 120_000);

  it("keeps a message that ran out of retries in the outbox, unsent, with its attempts and last error", async () => {
    await mailDown();
    app = await startApp(1); // one retry after the first try
    const approved: { id: string } = await db.knex("submissions").where({ status: "approved" }).first("id");
    // Opening a correction tells the contractor's technician.
    expect(
      await post(`/review/${approved.id}`, world.engineer.id, {
        intent: "correct",
        reason: "The blank correction was left out; recompute with it.",
      }),
    ).toBe(302);
    const notices: Array<{ id: string }> = await db
      .knex("email_outbox")
      .where("event_key", "like", "submission.correction_opened:%")
      .select("id");
    expect(notices.length).toBeGreaterThan(0);
    const ids = notices.map((n) => n.id);
    const jobs = await until(
      "the delivery jobs running out of retries",
      () =>
        db
          .knex("pgboss.job")
          .where({ name: "mail.deliver" })
          .whereIn("singleton_key", ids)
          .select("singleton_key", "state", "retry_count"),
      (rows: Array<{ state: string }>) => rows.length === ids.length && rows.every((j) => j.state === "failed"),
    );
    for (const j of jobs) expect(j).toMatchObject({ state: "failed", retry_count: 1 });
    const exhausted = (await outbox()).filter((r) => ids.includes(r.id));
    for (const r of exhausted)
      expect(r).toMatchObject({ sent_at: null, attempts: 2, last_error: expect.stringMatching(/\S/) });

    // With the service back it is not sent behind anyone's back: it waits, visible, for the
    // sweep (five minutes after it was last queued) or a person.
    await mailUp();
    await new Promise((r) => setTimeout(r, 4_000));
    const later = (await outbox()).filter((r) => ids.includes(r.id));
    for (const r of later) expect(r).toMatchObject({ sent_at: null, attempts: 2 });
    const counts = await inboxCounts();
    for (const r of later) expect(counts.get(`${r.to_email} | ${r.subject}`)).toBeUndefined();
  }, 120_000);
});
