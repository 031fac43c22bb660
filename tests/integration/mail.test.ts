import { randomBytes } from "node:crypto";
import { afterAll, beforeAll, beforeEach, describe, expect, it } from "vitest";
import { recordExchange } from "../../app/models/exposures.server";
import { saveLabResult, type LabInputs } from "../../app/models/lab-results.server";
import { submitForReview } from "../../app/models/submissions.server";
import { CAUTION, enqueueNotification, enqueueOverdueReminders } from "../../app/models/notifications.server";
import { decide, openCorrection } from "../../app/models/review.server";
import { closeDb } from "../../app/services/db.server";
import { resetEnvCache } from "../../app/services/env.server";
import { deliverOutboxEmail, MailDeliveryError } from "../../app/jobs/mail-delivery.server";
import { kickMailDelivery, startBackgroundJobs, stopBackgroundJobs, sweepOutbox } from "../../app/jobs/queue.server";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, type World } from "../helpers/fixtures";
import { outcomeOf } from "../helpers/outcome";

/**
 * E-mail notifications: the outbox row is written with the change, delivered once
 * through the Resend SDK against the local fake, retried when the provider fails, and
 * carried by the pg-boss queue.
 */

let db: TestDatabase;
let w: World;
// Every address in this file carries a tag, so the shared fake inbox can be read per file.
const tag = randomBytes(4).toString("hex");
const address = (local: string, domain: string) => `${local}+${tag}@${domain}`;
const mailUrl = () => {
  const url = process.env.FAKE_MAIL_URL;
  if (!url) throw new Error("FAKE_MAIL_URL is not set: run the tests with `npm test`");
  return url;
};
const iso = (daysAgo: number) => new Date(Date.now() - daysAgo * 86_400_000).toISOString();

type Delivered = { id: string; to: string[]; subject: string; html: string; text: string; from: string };

async function inbox(to: string): Promise<Delivered[]> {
  const res = await fetch(`${mailUrl()}/emails?to=${encodeURIComponent(to)}`);
  expect(res.ok).toBe(true);
  return ((await res.json()) as { data: Delivered[] }).data;
}

async function waitFor<T>(probe: () => Promise<T | undefined>, ms: number): Promise<T | undefined> {
  const deadline = Date.now() + ms;
  for (;;) {
    const value = await probe();
    if (value !== undefined || Date.now() > deadline) return value;
    await new Promise((r) => setTimeout(r, 250));
  }
}

const lab = (loss: number): LabInputs => ({
  cleaningMethod: "inhibited HCl",
  couponMassesG: [36.1234 - loss],
  finalMassG: null,
  blankInitialMassG: null,
  blankMassesG: [],
  baseMetalFromCycle: null,
  pitDepthsMm: [],
  labNotes: "",
});

let serialNo = 0;
/** A draft submission with one coupon pulled at the second point (90 days in service). */
async function draftSubmission(loss = 0.2): Promise<string> {
  const serial = `M-${++serialNo}`;
  await w.coupon(serial);
  const start = 3000 - serialNo * 100;
  expect(
    (
      await outcomeOf(
        recordExchange(db.knex, w.users.tech, w.point2, { installSerial: serial, installedAt: iso(start) }),
      )
    ).ok,
  ).toBe(true);
  const removed = await outcomeOf(recordExchange(db.knex, w.users.tech, w.point2, { removedAt: iso(start - 90) }));
  if (!removed.ok || !removed.removedExposureId) throw new Error("removal failed");
  const saved = await outcomeOf(saveLabResult(db.knex, w.users.tech, removed.removedExposureId, lab(loss)));
  if (!saved.ok) throw new Error(JSON.stringify(saved.errors));
  return saved.submissionId;
}

async function submitted(loss = 0.2): Promise<string> {
  const id = await draftSubmission(loss);
  const outcome = await outcomeOf(submitForReview(db.knex, w.users.tech, id));
  if (!outcome.ok) throw new Error(JSON.stringify(outcome.errors));
  return id;
}

async function versionOf(id: string): Promise<number> {
  return (await db.knex("submissions").where({ id }).first("version")).version;
}

async function outboxFor(prefix: string) {
  return db.knex("email_outbox").where("event_key", "like", `${prefix}%`).orderBy("to_email").select("*");
}

beforeAll(async () => {
  db = await createTestDatabase();
  // The app's pool (db()), the queue and the mailer read the environment lazily.
  process.env.DATABASE_URL = db.url;
  resetEnvCache();
  await closeDb();
  w = await buildWorld(db.knex);
  await db.knex.raw("update users set email = replace(email, '@', ?)", [`+${tag}@`]);
});

afterAll(async () => {
  await stopBackgroundJobs();
  await closeDb();
  await db?.drop();
});

beforeEach(async () => {
  expect((await fetch(`${mailUrl()}/emails`, { method: "DELETE" })).ok).toBe(true);
});

describe("the outbox is written with the change", () => {
  it("writes one message per active integrity engineer of the owner when a submission is submitted", async () => {
    const id = await submitted();
    const rows = await outboxFor(`submission.submitted:${id}:`);
    expect(rows.map((r) => r.to_email)).toEqual([address("engineer", "one.test")]);
    const [row] = rows;
    expect(row.owner_id).toBe(w.owner.id);
    expect(row.event_key).toBe(`submission.submitted:${id}:rev1:${address("engineer", "one.test")}`);
    const reference = (await db.knex("submissions").where({ id }).first("reference")).reference;
    expect(row.subject).toBe(`Submission ${reference} submitted by Monitoring Co`);
    expect(row.html).toContain(`/review/${id}`);
    expect(row.text).toContain(`/review/${id}`);
    expect(row.sent_at).toBeNull();
    expect(row.attempts).toBe(0);
  });

  it("writes nothing when the transaction of the change rolls back", async () => {
    const id = await draftSubmission();
    await expect(
      db.knex.transaction(async (trx) => {
        expect((await outcomeOf(submitForReview(trx, w.users.tech, id))).ok).toBe(true);
        expect(await trx("email_outbox").where("event_key", "like", `submission.submitted:${id}:%`)).toHaveLength(1);
        throw new Error("the change fails after the submission was submitted");
      }),
    ).rejects.toThrow(/change fails/);
    expect(await outboxFor(`submission.submitted:${id}:`)).toHaveLength(0);
    expect((await db.knex("submissions").where({ id }).first("status")).status).toBe("draft");
  });

  it("adds nothing when the same event is notified again", async () => {
    const id = await submitted();
    expect(
      await enqueueNotification(db.knex, { kind: "submission.submitted", submissionId: id, actorUserId: null }),
    ).toEqual([]);
    expect(await outboxFor(`submission.submitted:${id}:`)).toHaveLength(1);
  });
});

describe("delivery", () => {
  it("sends a message once; a second delivery of the same row sends nothing", async () => {
    const id = await submitted();
    const [row] = await outboxFor(`submission.submitted:${id}:`);
    expect(await deliverOutboxEmail(row.id)).toBe("sent");
    expect(await deliverOutboxEmail(row.id)).toBe("already sent");

    const mail = (await inbox(address("engineer", "one.test"))).filter((m) => m.subject === row.subject);
    expect(mail).toHaveLength(1);
    expect(mail[0].to).toEqual([address("engineer", "one.test")]);
    expect(mail[0].html).toContain(`http://127.0.0.1:3000/review/${id}`);
    expect(mail[0].text).toContain(`Review the submission: http://127.0.0.1:3000/review/${id}`);
    const after = await db.knex("email_outbox").where({ id: row.id }).first();
    expect(after.sent_at).not.toBeNull();
    expect(after.provider_id).toBe(mail[0].id);
    expect(after.attempts).toBe(1);
  });

  it("throws when the provider fails (so the queue retries), then sends exactly one message", async () => {
    const id = await submitted();
    const comment = `Re-weigh the coupon <b>after</b> cleaning & check the "blank"`;
    expect(
      (
        await outcomeOf(
          decide(db.knex, w.users.engineer, id, { decision: "return", version: await versionOf(id), comment }),
        )
      ).ok,
    ).toBe(true);
    const [row] = await outboxFor(`submission.returned:${id}:`);
    expect(row.to_email).toBe(address("tech", "monitoring.test"));

    const armed = await fetch(`${mailUrl()}/_fail-next`, {
      method: "POST",
      headers: { "content-type": "application/json" },
      body: JSON.stringify({ count: 1, status: 500 }),
    });
    expect(armed.ok).toBe(true);
    await expect(deliverOutboxEmail(row.id)).rejects.toBeInstanceOf(MailDeliveryError);
    const failed = await db.knex("email_outbox").where({ id: row.id }).first();
    expect(failed.sent_at).toBeNull();
    expect(failed.attempts).toBe(1);
    expect(failed.last_error).toMatch(/500/);

    expect(await deliverOutboxEmail(row.id)).toBe("sent");
    expect(await deliverOutboxEmail(row.id)).toBe("already sent");
    const mail = await inbox(address("tech", "monitoring.test"));
    expect(mail).toHaveLength(1);
    expect(mail[0].subject).toMatch(/^Submission .+ returned by Owner One: changes requested$/);
    expect(mail[0].html).toContain(`/submissions/${id}`);
    expect(mail[0].html).not.toContain("/review/");
    // every interpolated value is escaped in the HTML, kept as typed in the text
    expect(mail[0].html).toContain(
      "Re-weigh the coupon &lt;b&gt;after&lt;/b&gt; cleaning &amp; check the &quot;blank&quot;",
    );
    expect(mail[0].html).not.toContain("<b>after</b>");
    expect(mail[0].text).toContain(`> ${comment}`);
    const sent = await db.knex("email_outbox").where({ id: row.id }).first();
    expect(sent.attempts).toBe(2);
    expect(sent.provider_id).toBe(mail[0].id);
  });

  it("sends an approval to the submitter only", async () => {
    const id = await submitted();
    expect(
      (
        await outcomeOf(
          decide(db.knex, w.users.engineer, id, {
            decision: "approve",
            version: await versionOf(id),
            comment: "",
            confirmed: true,
          }),
        )
      ).ok,
    ).toBe(true);
    const rows = await outboxFor(`submission.approved:${id}:`);
    expect(rows.map((r) => r.to_email)).toEqual([address("tech", "monitoring.test")]);
    expect(rows[0].subject).toMatch(/^Submission .+ approved by Owner One$/);
    expect(await outboxFor(`submission.approved-serious:${id}:`)).toHaveLength(0);
  });
});

describe("a high or severe result approved", () => {
  it("tells the owner's other integrity engineers and plant managers where, what and what it means, with the caution", async () => {
    await db.knex("users").where({ id: w.users.manager.id }).update({ units: "us" });
    await db.knex("users").insert({
      email: address("engineer.b", "one.test"),
      name: "Second engineer",
      role: "integrity_engineer",
      status: "active",
      organisation_id: w.owner.id,
    });
    await db.knex("circuits").where({ tag: "C-1" }).update({ description: "Sour water stripper feed" });
    await db
      .knex("monitoring_points")
      .where({ id: w.point2 })
      .update({ access_fitting: "AF-12", orientation: "6 o'clock" });
    const id = await submitted(3.0); // about 0.44 mm/y over 90 days: severe on the default bands
    expect((await db.knex("submissions").where({ id }).first("worst_severity")).worst_severity).toBe("severe");
    expect(
      (
        await outcomeOf(
          decide(db.knex, w.users.engineer, id, {
            decision: "approve",
            version: await versionOf(id),
            comment: "",
            confirmed: true,
          }),
        )
      ).ok,
    ).toBe(true);

    const serious = await outboxFor(`submission.approved-serious:${id}:`);
    // the engineer who approved it is not told about their own approval
    expect(serious.map((r) => r.to_email)).toEqual([address("engineer.b", "one.test"), address("manager", "one.test")]);
    expect((await outboxFor(`submission.approved:${id}:`)).map((r) => r.to_email)).toEqual([
      address("tech", "monitoring.test"),
    ]);
    for (const r of [...serious, ...(await outboxFor(`submission.approved:${id}:`))])
      expect(await deliverOutboxEmail(r.id)).toBe("sent");

    for (const who of [address("engineer.b", "one.test"), address("manager", "one.test")]) {
      const mail = (await inbox(who)).filter((m) => /corrosion result approved/.test(m.subject));
      expect(mail).toHaveLength(1);
      expect(mail[0].subject).toMatch(/^(High|Severe) corrosion result approved: submission .+ at Plant A$/);
      expect(mail[0].text).toContain(CAUTION);
      expect(mail[0].html).toContain("qualified engineer or authorised piping inspector");
      expect(mail[0].html).toContain("local codes, jurisdictional rules and the owner&#x27;s own procedures govern");
      expect(mail[0].html).toContain(`/review/${id}`);
      const text = mail[0].text.replace(/\s+/g, " ");
      expect(text).toContain("for Plant A (PA) was approved by engineer of Owner One");
      expect(text).toContain("C-1 (Sour water stripper feed)");
      expect(text).toContain("CP-2 (AF-12, 6 o'clock)");
      expect(text).toMatch(/M-\d+/);
      // what the grade means, from the bands the result was graded with, then the caution
      const caution = text.indexOf(CAUTION);
      const meaning = text.search(/(High|Severe) means general corrosion /);
      expect(meaning).toBeGreaterThan(-1);
      expect(meaning).toBeLessThan(caution);
      expect(text).toMatch(/\(NACE SP0775 bands, carbon steel\)\./);
    }
    // each reader's own units (SP0775 severe general: above 10 mpy = 0.254 mm/y, published edge)
    const managerText = (await inbox(address("manager", "one.test")))[0].text;
    expect(managerText).toMatch(/\d+\.\d\d mpy/);
    expect(managerText.replace(/\s+/g, " ")).toContain("Severe means general corrosion above 10 mpy");
    const engineerText = (await inbox(address("engineer.b", "one.test")))[0].text;
    expect(engineerText).toMatch(/\d+\.\d{3} mm\/y/);
    expect(engineerText.replace(/\s+/g, " ")).toContain("Severe means general corrosion above 0.254 mm/y");
    expect(await inbox(address("engineer", "one.test"))).toHaveLength(0);
    expect(await inbox(address("admin", "one.test"))).toHaveLength(0);
    expect(await inbox(address("engineer", "two.test"))).toHaveLength(0);
  });
});

describe("nobody is mailed about their own action", () => {
  it("takes the person who caused the event off every list of recipients", async () => {
    const id = await submitted();
    const engineers = [address("engineer", "one.test"), address("engineer.b", "one.test")];
    // the technician who submitted is not among the recipients of the submission
    expect((await outboxFor(`submission.submitted:${id}:`)).map((r) => r.to_email)).toEqual(engineers);

    await db.knex("email_outbox").where("event_key", "like", `%:${id}:%`).delete();
    const engineer = w.users.engineer.id;
    const tech = w.users.tech.id;
    const toOf = async (ids: string[]) =>
      db.knex("email_outbox").whereIn("id", ids).orderBy("to_email").pluck("to_email");
    // an engineer as the actor: the other engineer is told, the actor is not
    expect(
      await toOf(
        await enqueueNotification(db.knex, { kind: "submission.submitted", submissionId: id, actorUserId: engineer }),
      ),
    ).toEqual([address("engineer.b", "one.test")]);
    // the submitter as the actor of a decision (their only list): nothing is written
    expect(
      await enqueueNotification(db.knex, { kind: "submission.returned", submissionId: id, actorUserId: tech }),
    ).toEqual([]);
    expect(
      await enqueueNotification(db.knex, { kind: "submission.approved", submissionId: id, actorUserId: tech }),
    ).toEqual([]);
    // someone else acting: the list is written whole
    expect(
      await toOf(
        await enqueueNotification(db.knex, { kind: "submission.returned", submissionId: id, actorUserId: engineer }),
      ),
    ).toEqual([address("tech", "monitoring.test")]);
  });

  it("does not tell the approving engineer of the serious result they approved, nor the engineer who opens a correction", async () => {
    const id = await submitted(3.0);
    expect(
      (
        await outcomeOf(
          decide(db.knex, w.users.engineer, id, {
            decision: "approve",
            version: await versionOf(id),
            comment: "",
            confirmed: true,
          }),
        )
      ).ok,
    ).toBe(true);
    const serious = (await outboxFor(`submission.approved-serious:${id}:`)).map((r) => r.to_email);
    expect(serious).toContain(address("manager", "one.test"));
    expect(serious).not.toContain(address("engineer", "one.test"));
    const opened = await outcomeOf(openCorrection(db.knex, w.users.engineer, id, "Wrong coupon weighed"));
    expect(opened.ok).toBe(true);
    const corrections = await db
      .knex("email_outbox")
      .where("event_key", "like", "submission.correction_opened:%")
      .pluck("to_email");
    expect(corrections).toContain(address("tech", "monitoring.test"));
    expect(corrections).not.toContain(address("engineer", "one.test"));
  });
});

describe("the daily reminder of overdue pulls", () => {
  it("lists each contractor's own overdue points, once a day", async () => {
    // Monitoring Co: CP-1 (90 d planned) in service for 120 days → overdue.
    await w.coupon("OVD-1");
    expect(
      (
        await outcomeOf(
          recordExchange(db.knex, w.users.tech, w.point, { installSerial: "OVD-1", installedAt: iso(120) }),
        )
      ).ok,
    ).toBe(true);
    // Another monitoring contractor at Plant B with its own overdue point CP-9.
    const [other] = await db
      .knex("organisations")
      .insert({ name: "Second Monitoring Co", kind: "contractor" })
      .returning("id");
    const [contract] = await db
      .knex("contracts")
      .insert({
        owner_id: w.owner.id,
        contractor_id: other.id,
        reference: `C-second-${tag}`,
        scope: ["coupon_monitoring"],
        starts_on: w.shift(-30),
        ends_on: null,
      })
      .returning("id");
    await db.knex("contract_sites").insert({ contract_id: contract.id, site_id: w.site2.id });
    await db.knex("users").insert({
      email: address("tech", "second.test"),
      name: "Second tech",
      role: "contractor_technician",
      status: "active",
      organisation_id: other.id,
    });
    const [unit] = await db
      .knex("process_units")
      .insert({ site_id: w.site2.id, tag: "U-9", description: "Unit nine" })
      .returning("id");
    const [circuit] = await db
      .knex("circuits")
      .insert({ unit_id: unit.id, site_id: w.site2.id, tag: "C-9", material_code: "carbon-steel", service: "overhead" })
      .returning("id");
    const [point9] = await db
      .knex("monitoring_points")
      .insert({
        owner_id: w.owner.id,
        site_id: w.site2.id,
        circuit_id: circuit.id,
        tag: "CP-9",
        planned_exposure_days: 30,
      })
      .returning("id");
    const coupon9 = await w.coupon("OVD-9");
    await db.knex("coupon_exposures").insert({
      owner_id: w.owner.id,
      point_id: point9.id,
      coupon_id: coupon9,
      installed_at: iso(45),
      installed_by_organisation_id: other.id,
    });

    // Plant B keeps UTC, Plant A America/Chicago: each gets its reminder in its own morning.
    const today = new Date().toISOString().slice(0, 10);
    const at = (hhmm: string) => new Date(`${today}T${hhmm}:00Z`);
    const plantBMorning = await enqueueOverdueReminders(db.knex, at("08:00")); // 08:00 at Plant B, 02:00 at Plant A
    expect(plantBMorning.reminders).toEqual([{ contractorId: other.id, siteId: w.site2.id, day: today }]);
    const plantAMorning = await enqueueOverdueReminders(db.knex, at("15:00")); // 09:00 CST / 10:00 CDT at Plant A
    expect(plantAMorning.reminders).toEqual([{ contractorId: w.monitoring.id, siteId: w.site.id, day: today }]);
    const ids = [...plantBMorning.outboxIds, ...plantAMorning.outboxIds];
    const rows = await db.knex("email_outbox").whereIn("id", ids).orderBy("to_email").select("*");
    expect(rows.map((r) => r.to_email)).toEqual([address("tech", "monitoring.test"), address("tech", "second.test")]);
    expect(rows[0].event_key).toBe(
      `overdue.reminder:${w.monitoring.id}:${w.site.id}:${today}:${address("tech", "monitoring.test")}`,
    );
    // the same day again, at either site: nothing new
    expect(await enqueueOverdueReminders(db.knex, at("16:00"))).toEqual({ reminders: [], outboxIds: [] });
    expect(await enqueueOverdueReminders(db.knex, at("09:00"))).toEqual({ reminders: [], outboxIds: [] });

    for (const r of rows) expect(await deliverOutboxEmail(r.id)).toBe("sent");
    const mine = await inbox(address("tech", "monitoring.test"));
    expect(mine).toHaveLength(1);
    expect(mine[0].subject).toBe("1 coupon pull overdue at Plant A for Monitoring Co");
    expect(mine[0].text).toContain("CP-1");
    expect(mine[0].text).toContain("OVD-1");
    expect(mine[0].text).not.toContain("CP-9");
    expect(mine[0].html).toContain("CP-1");
    expect(mine[0].html).toContain("/pulls");
    const theirs = await inbox(address("tech", "second.test"));
    expect(theirs).toHaveLength(1);
    expect(theirs[0].text).toContain("CP-9");
    expect(theirs[0].text).not.toContain("CP-1");
    // thickness-only and lapsed contractors hear nothing
    expect(await inbox(address("tech", "inspection.test"))).toHaveLength(0);
    expect(await inbox(address("tech", "lapsed.test"))).toHaveLength(0);
  });
});

describe("through the job queue (pg-boss)", () => {
  it(
    "delivers a sent submission's message after the commit, and the sweep picks up what was never queued",
    { timeout: 60_000 },
    async () => {
      await startBackgroundJobs();
      await startBackgroundJobs(); // a second start is a no-op

      const id = await submitted();
      const reference = (await db.knex("submissions").where({ id }).first("reference")).reference as string;
      const arrived = await waitFor(async () => {
        const hit = (await inbox(address("engineer", "one.test"))).filter((m) => m.subject.includes(reference));
        return hit.length ? hit : undefined;
      }, 15_000);
      expect(arrived).toHaveLength(1);
      // sent_at commits just after the provider's answer
      const row = await waitFor(async () => {
        const [r] = await outboxFor(`submission.submitted:${id}:`);
        return r?.sent_at ? r : undefined;
      }, 5_000);
      expect(row?.provider_id).toBe(arrived![0].id);
      expect(row?.queued_at).not.toBeNull();

      // Queueing the same message again (twice) sends nothing more: the row is already sent.
      // (pg-boss also folds repeats into one job within its singleton window, but the window
      // is aligned to the clock, so a job count would depend on when the test runs.)
      await kickMailDelivery([row!.id, row!.id]);
      await new Promise((r) => setTimeout(r, 3000));
      expect((await inbox(address("engineer", "one.test"))).filter((m) => m.subject.includes(reference))).toHaveLength(
        1,
      );

      // A message committed but never queued (the process died in between).
      const [orphan] = await db
        .knex("email_outbox")
        .insert({
          owner_id: w.owner.id,
          event_key: `test.orphan:${tag}`,
          to_email: address("orphan", "one.test"),
          subject: "Left behind",
          html: "<p>Left behind</p>",
          text: "Left behind",
        })
        .returning("id");
      expect(await sweepOutbox()).toBeGreaterThanOrEqual(1);
      const found = await waitFor(async () => {
        const hit = await inbox(address("orphan", "one.test"));
        return hit.length ? hit : undefined;
      }, 15_000);
      expect(found).toHaveLength(1);
      expect(
        await waitFor(
          async () => (await db.knex("email_outbox").where({ id: orphan.id }).first("sent_at")).sent_at ?? undefined,
          5_000,
        ),
      ).toBeTruthy();

      // The provider fails once: the job goes to "retry", and its retry sends exactly one message.
      // The fake's failure hook is global, so first let the sweep's backlog (earlier tests'
      // unsent rows) drain, or it could take the failure.
      const idle = await waitFor(async () => {
        const { rows } = await db.knex.raw(
          `select (select count(*)::int from email_outbox where sent_at is null) as unsent,
                (select count(*)::int from pgboss.job where name = 'mail.deliver' and state in ('created', 'retry', 'active')) as live`,
        );
        return rows[0].unsent === 0 && rows[0].live === 0 ? true : undefined;
      }, 15_000);
      expect(idle).toBe(true);
      const armed = await fetch(`${mailUrl()}/_fail-next`, {
        method: "POST",
        headers: { "content-type": "application/json" },
        body: JSON.stringify({ count: 1, status: 503 }),
      });
      expect(armed.ok).toBe(true);
      const [flaky] = await db
        .knex("email_outbox")
        .insert({
          owner_id: w.owner.id,
          event_key: `test.flaky:${tag}`,
          to_email: address("flaky", "one.test"),
          subject: "Second try",
          html: "<p>Second try</p>",
          text: "Second try",
        })
        .returning("id");
      expect(await kickMailDelivery([flaky.id])).toBe(1);
      const retrying = await waitFor(async () => {
        const { rows } = await db.knex.raw(
          "select state, start_after > now() as backed_off from pgboss.job where name = 'mail.deliver' and singleton_key = ?",
          [flaky.id],
        );
        return rows[0]?.state === "retry" ? rows[0] : undefined;
      }, 15_000);
      expect(retrying).toEqual({ state: "retry", backed_off: true });
      const afterFailure = await db.knex("email_outbox").where({ id: flaky.id }).first();
      expect(afterFailure).toMatchObject({ attempts: 1, sent_at: null });
      expect(afterFailure.last_error).toMatch(/503/);
      // Bring the backed-off retry forward instead of waiting 30–60 s for it.
      await db.knex.raw("update pgboss.job set start_after = now() where name = 'mail.deliver' and singleton_key = ?", [
        flaky.id,
      ]);
      const retried = await waitFor(async () => {
        const hit = await inbox(address("flaky", "one.test"));
        return hit.length ? hit : undefined;
      }, 15_000);
      expect(retried).toHaveLength(1);
      await new Promise((r) => setTimeout(r, 1500));
      expect(await inbox(address("flaky", "one.test"))).toHaveLength(1);
      expect((await db.knex("email_outbox").where({ id: flaky.id }).first("attempts")).attempts).toBe(2);

      await stopBackgroundJobs();
      expect(await kickMailDelivery([orphan.id])).toBe(0); // stopped: nothing queued
    },
  );
});
