import { afterAll, beforeAll, describe, expect, it } from "vitest";
import {
  claimOutboxMessage,
  markOutboxQueued,
  OUTBOX_MAX_ATTEMPTS,
  outboxLeftBehind,
  recordOutboxFailure,
  recordOutboxSent,
  releaseUndelivered,
  undeliveredMessages,
} from "../../app/models/email-outbox.server";
import { createTestDatabase, type TestDatabase } from "../helpers/db";

/**
 * The outbox rows as delivery handles them: a claim keeps other workers off a message
 * without a lock held while the provider answers, sent_at is set once, and the sweep
 * finds what no live job carries.
 */

let db: TestDatabase;
let serial = 0;

async function message(): Promise<string> {
  const [row] = await db
    .knex("email_outbox")
    .insert({
      owner_id: null,
      event_key: `test.outbox:${++serial}`,
      to_email: `someone${serial}@one.test`,
      subject: "A subject",
      html: "<p>Body</p>",
      text: "Body",
    })
    .returning("id");
  return row.id;
}

beforeAll(async () => {
  db = await createTestDatabase();
});

afterAll(async () => {
  await db?.drop();
});

describe("claiming a message", () => {
  it("gives it to one worker at a time, holds no row lock, and counts the attempt", async () => {
    const id = await message();
    const first = await claimOutboxMessage(db.knex, id, 60);
    expect(first).toMatchObject({ claimed: true, message: { id, to_email: `someone${serial}@one.test` } });
    expect(await claimOutboxMessage(db.knex, id, 60)).toEqual({ claimed: false, state: "busy" });
    // Nothing stays locked while the claimant talks to the provider.
    await db.knex.transaction(async (trx) => {
      expect(await trx("email_outbox").where({ id }).forUpdate().noWait().first("id")).toEqual({ id });
    });
    const row = await db.knex("email_outbox").where({ id }).first();
    expect(row.attempts).toBe(1);
    expect(row.last_attempt_at).not.toBeNull();
    expect(row.claimed_until.getTime()).toBeGreaterThan(Date.now());
  });

  it("lets a failed attempt go, so the retry may send; a sent message is never claimed again", async () => {
    const id = await message();
    expect((await claimOutboxMessage(db.knex, id, 60)).claimed).toBe(true);
    await recordOutboxFailure(db.knex, id, "500 application_error: down");
    expect(await db.knex("email_outbox").where({ id }).first("last_error", "claimed_until", "sent_at")).toEqual({
      last_error: "500 application_error: down",
      claimed_until: null,
      sent_at: null,
    });
    expect((await claimOutboxMessage(db.knex, id, 60)).claimed).toBe(true);
    await recordOutboxSent(db.knex, id, "provider-1");
    await recordOutboxSent(db.knex, id, "provider-2"); // a late second answer changes nothing
    await recordOutboxFailure(db.knex, id, "late failure");
    const sent = await db.knex("email_outbox").where({ id }).first();
    expect(sent).toMatchObject({ provider_id: "provider-1", attempts: 2, claimed_until: null });
    expect(sent.sent_at).not.toBeNull();
    expect(sent.last_error).toBe("500 application_error: down");
    expect(await claimOutboxMessage(db.knex, id, 60)).toEqual({ claimed: false, state: "already sent" });
  });

  it("takes over a claim that ran out (its worker died mid-send)", async () => {
    const id = await message();
    expect((await claimOutboxMessage(db.knex, id, 60)).claimed).toBe(true);
    await db
      .knex("email_outbox")
      .where({ id })
      .update({ claimed_until: db.knex.raw("now() - interval '1 second'") });
    expect((await claimOutboxMessage(db.knex, id, 60)).claimed).toBe(true);
    expect((await db.knex("email_outbox").where({ id }).first("attempts")).attempts).toBe(2);
  });

  it("answers missing for an unknown or malformed id", async () => {
    expect(await claimOutboxMessage(db.knex, "00000000-0000-4000-8000-000000000000", 60)).toEqual({
      claimed: false,
      state: "missing",
    });
    expect(await claimOutboxMessage(db.knex, "not-an-id", 60)).toEqual({ claimed: false, state: "missing" });
  });
});

describe("the sweep's query", () => {
  it("finds unsent messages not queued lately and under the attempt limit, oldest first", async () => {
    await db.knex("email_outbox").update({ sent_at: db.knex.fn.now(), provider_id: "earlier" }).whereNull("sent_at");
    const older = await message();
    const newer = await message();
    const queued = await message();
    const exhausted = await message();
    await db
      .knex("email_outbox")
      .where({ id: older })
      .update({ created_at: db.knex.raw("now() - interval '1 hour'") });
    await markOutboxQueued(db.knex, [queued]);
    await db.knex("email_outbox").where({ id: exhausted }).update({ attempts: 40 });
    // A stand-in for the queue's job table (pg-boss keeps its own in its schema).
    await db.knex.raw("create schema queue_stand_in");
    await db.knex.raw("create table queue_stand_in.job (name text, singleton_key text, state text)");
    const query = {
      maxAttempts: 40,
      requeueAfter: "5 minutes",
      jobTable: "queue_stand_in.job",
      jobName: "mail.deliver",
      limit: 10,
    };
    expect(await outboxLeftBehind(db.knex, query)).toEqual([older, newer]);
    await db.knex("queue_stand_in.job").insert({ name: "mail.deliver", singleton_key: newer, state: "retry" });
    expect(await outboxLeftBehind(db.knex, query)).toEqual([older]);
    await db.knex("queue_stand_in.job").insert({ name: "mail.deliver", singleton_key: older, state: "completed" });
    expect(await outboxLeftBehind(db.knex, query)).toEqual([older]);
  });
});

describe("messages that wait for a person", () => {
  it("holds a message first tried more than 23 hours ago instead of risking a second copy, and an administrator releases it", async () => {
    const [owner] = await db.knex("organisations").insert({ name: "Held Mail Owner", kind: "owner" }).returning("id");
    const [other] = await db.knex("organisations").insert({ name: "Other Owner", kind: "owner" }).returning("id");
    const id = await message();
    // Tried once a day ago (the provider's Idempotency-Key lasts 24 h) and never recorded as sent.
    await db
      .knex("email_outbox")
      .where({ id })
      .update({ owner_id: owner.id, attempts: 1, created_at: db.knex.raw("now() - interval '25 hours'") });
    expect(await claimOutboxMessage(db.knex, id, 60)).toEqual({ claimed: false, state: "held" });
    expect(await claimOutboxMessage(db.knex, id, 60)).toEqual({ claimed: false, state: "held" });
    expect((await db.knex("email_outbox").where({ id }).first("attempts")).attempts).toBe(1);
    const left = await outboxLeftBehind(db.knex, {
      maxAttempts: OUTBOX_MAX_ATTEMPTS,
      requeueAfter: "5 minutes",
      jobTable: "queue_stand_in.job",
      jobName: "mail.deliver",
      limit: 500,
    });
    expect(left).not.toContain(id);

    // One out of attempts after a long outage waits too.
    const tired = await message();
    await db
      .knex("email_outbox")
      .where({ id: tired })
      .update({ owner_id: owner.id, attempts: OUTBOX_MAX_ATTEMPTS, last_error: "HTTP 503" });
    const waiting = await undeliveredMessages(db.knex, owner.id, OUTBOX_MAX_ATTEMPTS);
    expect(waiting.map((m) => m.id).sort()).toEqual([id, tired].sort());
    expect(waiting.find((m) => m.id === id)?.why).toMatch(/it may have arrived/);
    expect(waiting.find((m) => m.id === tired)?.why).toBe(`The mail service refused it ${OUTBOX_MAX_ATTEMPTS} times.`);
    expect(await undeliveredMessages(db.knex, other.id, OUTBOX_MAX_ATTEMPTS)).toEqual([]);

    const actor = { userId: null, organisationId: owner.id, label: "admin@held.test" };
    expect(await releaseUndelivered(db.knex, { ownerId: other.id, actor }, id)).toEqual({ released: false });
    expect(await releaseUndelivered(db.knex, { ownerId: owner.id, actor }, id)).toMatchObject({ released: true });
    const row = await db.knex("email_outbox").where({ id }).first("held_at", "attempts");
    expect(row).toEqual({ held_at: null, attempts: 0 });
    const event = await db.knex("audit_events").where({ record_id: id }).first("action", "owner_id");
    expect(event).toEqual({ action: "email.released", owner_id: owner.id });
  });
});
