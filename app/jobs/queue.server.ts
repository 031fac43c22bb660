import PgBoss from "pg-boss";
import { cleanUpPendingAttachments } from "../models/attachments.server";
import { lifeRunsLeftBehind, onLifeRunQueued, runLifeRecompute } from "../models/circuit-life.server";
import { runFullAuditVerification } from "../models/audit.server";
import { markOutboxQueued, OUTBOX_MAX_ATTEMPTS, outboxLeftBehind } from "../models/email-outbox.server";
import { enqueueOverdueReminders, onOutboxCommitted } from "../models/notifications.server";
import { pruneExpiredSessions } from "../models/sessions.server";
import { db } from "../services/db.server";
import { env } from "../services/env.server";
import { deliverOutboxEmail } from "./mail-delivery.server";

/**
 * Background jobs on pg-boss, in the app's own database (schema `pgboss`).
 *
 *   mail.deliver          one outbox message ({ outboxId }); retried with backoff when
 *                         the provider fails; one live job per message (singletonKey)
 *   mail.sweep            every minute: queues outbox messages that are unsent and have
 *                         no live job (a crash between commit and queueing, a delivery
 *                         that ran out of retries during a long outage)
 *   mail.overdue-reminder every hour: the morning reminder of overdue pulls for the sites
 *                         where it is 06:00 (or, made up after a missed run, before noon)
 *                         and that have not had today's, in each site's own zone
 *   attachments.clean-up  every 15 minutes: objects and rows of uploads left pending
 *   audit.verify          daily at 02:30 UTC: every owner's audit trail re-hashed from its
 *                         first event; the result is kept and shown on the audit page
 *   sessions.prune        hourly: sessions past their idle or absolute expiry, and those
 *                         of people no longer active, are deleted
 *   life.recompute        one remaining-life recompute run ({ runId }): every circuit of
 *                         the owner in batches; queued right after the run's row commits
 *   life.sweep            every minute: starts runs left queued (a lost kick, a restart)
 *
 * The workers call models (app/models) and the delivery worker (./mail-delivery.server).
 * Every app instance may run this; pg-boss hands each job to one worker and each
 * scheduled run to one instance.
 */

const SCHEMA = "pgboss";
export const QUEUES = {
  deliver: "mail.deliver",
  sweep: "mail.sweep",
  reminder: "mail.overdue-reminder",
  attachmentCleanUp: "attachments.clean-up",
  auditVerify: "audit.verify",
  sessionsPrune: "sessions.prune",
  lifeRecompute: "life.recompute",
  lifeSweep: "life.sweep",
} as const;

const queueOptions = (): Record<(typeof QUEUES)[keyof typeof QUEUES], Omit<PgBoss.Queue, "name">> => ({
  // By default eight retries, 30 s doubling each time with jitter: the last one comes 2–4
  // hours in (MAIL_RETRY_LIMIT, MAIL_RETRY_DELAY_SECONDS).
  [QUEUES.deliver]: {
    policy: "standard",
    retryLimit: env().MAIL_RETRY_LIMIT,
    retryDelay: env().MAIL_RETRY_DELAY_SECONDS,
    retryBackoff: true,
    expireInSeconds: 180,
    retentionMinutes: 7 * 24 * 60,
  },
  [QUEUES.sweep]: { policy: "singleton", retryLimit: 1, retryDelay: 10, expireInSeconds: 120, retentionMinutes: 60 },
  // Uploads that never finished (pending rows): their objects and rows go after 30 minutes.
  [QUEUES.attachmentCleanUp]: {
    policy: "singleton",
    retryLimit: 2,
    retryDelay: 60,
    expireInSeconds: 600,
    retentionMinutes: 24 * 60,
  },
  [QUEUES.auditVerify]: {
    policy: "singleton",
    retryLimit: 2,
    retryDelay: 300,
    expireInSeconds: 60 * 60,
    retentionMinutes: 7 * 24 * 60,
  },
  [QUEUES.sessionsPrune]: {
    policy: "singleton",
    retryLimit: 2,
    retryDelay: 60,
    expireInSeconds: 600,
    retentionMinutes: 24 * 60,
  },
  // A run is claimed once (queued → running), so a repeated job does nothing.
  [QUEUES.lifeRecompute]: {
    policy: "standard",
    retryLimit: 0,
    expireInSeconds: 60 * 60,
    retentionMinutes: 7 * 24 * 60,
  },
  [QUEUES.lifeSweep]: {
    policy: "singleton",
    retryLimit: 1,
    retryDelay: 10,
    expireInSeconds: 120,
    retentionMinutes: 60,
  },
  [QUEUES.reminder]: {
    policy: "singleton",
    retryLimit: 8,
    retryDelay: 60,
    retryBackoff: true,
    expireInSeconds: 15 * 60,
    retentionMinutes: 7 * 24 * 60,
  },
});

/** Two queueings of one message in this window collapse into one job. */
const DELIVER_SINGLETON_SECONDS = 300;
/** A message the sweep left alone for this long may be queued again. */
const REQUEUE_AFTER = "5 minutes";
const SWEEP_BATCH = 500;
/** Messages one worker takes per fetch; with the send timeout (10 s) they fit in the job expiry. */
const DELIVER_BATCH = 10;

let boss: PgBoss | undefined;
let starting: Promise<void> | undefined;

function log(line: string) {
  console.log(`${new Date().toISOString()} jobs: ${line}`);
}

async function start(): Promise<void> {
  const b = new PgBoss({
    connectionString: env().DATABASE_URL,
    schema: SCHEMA,
    application_name: "wallcast-jobs",
    max: 4,
  });
  // Without a listener an 'error' event would end the process; a lost connection is
  // retried by pg-boss itself.
  b.on("error", (error) => console.error(`${new Date().toISOString()} jobs: ${error.message}`));
  try {
    await b.start();
    // Queues first: pg-boss 10 refuses to send to or schedule on a queue that does not exist.
    for (const [name, options] of Object.entries(queueOptions())) {
      await b.createQueue(name, { name, ...options });
      await b.updateQueue(name, { name, ...options });
    }
    boss = b;
    // Several messages per fetch (pg-boss waits out the polling interval between fetches).
    // Each job succeeds or fails on its own: a failed one is failed here, so the
    // completion pg-boss records for the batch afterwards skips it and it is retried.
    await b.work<{ outboxId?: unknown }>(
      QUEUES.deliver,
      { pollingIntervalSeconds: 1, batchSize: DELIVER_BATCH },
      async (jobs) => {
        for (const job of jobs) {
          const id = job.data?.outboxId;
          if (typeof id !== "string") continue;
          try {
            await deliverOutboxEmail(id);
          } catch (error) {
            await b.fail(QUEUES.deliver, job.id, { message: (error as Error).message }).catch(() => undefined);
          }
        }
      },
    );
    await b.work(QUEUES.sweep, { pollingIntervalSeconds: 5 }, async () => ({ queued: await sweepOutbox() }));
    await b.work(QUEUES.reminder, { pollingIntervalSeconds: 10 }, async () => {
      const run = await enqueueOverdueReminders(db());
      return { reminders: run.reminders.length, messages: run.outboxIds.length };
    });
    await b.schedule(QUEUES.sweep, "* * * * *", {}, { tz: "UTC" });
    await b.work(QUEUES.attachmentCleanUp, { pollingIntervalSeconds: 30 }, async () =>
      cleanUpPendingAttachments(db(), 30),
    );
    // Hourly on the hour: every zone's 06:00 hour (half-hour zones included) meets one run.
    await b.schedule(QUEUES.reminder, "0 * * * *", {}, { tz: "UTC" });
    await b.schedule(QUEUES.attachmentCleanUp, "*/15 * * * *", {}, { tz: "UTC" });
    await b.work(QUEUES.auditVerify, { pollingIntervalSeconds: 60 }, async () => {
      const reports = await runFullAuditVerification(db());
      return { owners: reports.length, broken: reports.reduce((n, r) => n + r.broken.length, 0) };
    });
    await b.schedule(QUEUES.auditVerify, "30 2 * * *", {}, { tz: "UTC" });
    await b.work(QUEUES.sessionsPrune, { pollingIntervalSeconds: 60 }, async () => ({
      deleted: await pruneExpiredSessions(db()),
    }));
    await b.schedule(QUEUES.sessionsPrune, "17 * * * *", {}, { tz: "UTC" });
    await b.work<{ runId?: unknown }>(QUEUES.lifeRecompute, { pollingIntervalSeconds: 2 }, async ([job]) => {
      const id = job?.data?.runId;
      if (typeof id !== "string") return { skipped: true };
      const r = await runLifeRecompute(db(), id);
      log(`life recompute ${id}: ${r.state}, ${r.circuits} circuits in ${r.seconds.toFixed(1)} s`);
      return r;
    });
    await b.work(QUEUES.lifeSweep, { pollingIntervalSeconds: 10 }, async () => ({
      queued: await kickLifeRuns(await lifeRunsLeftBehind(db())),
    }));
    await b.schedule(QUEUES.lifeSweep, "* * * * *", {}, { tz: "UTC" });
    onOutboxCommitted((ids) => kickMailDelivery(ids));
    onLifeRunQueued((ids) => kickLifeRuns(ids));
  } catch (error) {
    boss = undefined;
    await b.stop({ graceful: false, wait: true, timeout: 1000 }).catch(() => undefined);
    throw error;
  }
}

/**
 * Starts the queue and its workers in this process (idempotent: a second call waits for
 * the first). A failure rejects and leaves nothing running, so the caller may try again.
 */
export function startBackgroundJobs(): Promise<void> {
  starting ??= start().then(
    () => log(`queue running (schema ${SCHEMA}): ${Object.values(QUEUES).join(", ")}`),
    (error) => {
      starting = undefined;
      throw error;
    },
  );
  return starting;
}

/** Stops the workers, letting a job in progress finish (up to 10 s), and closes the queue's connections. */
export async function stopBackgroundJobs(): Promise<void> {
  const pending = starting;
  if (!pending) return;
  await pending.catch(() => undefined);
  const b = boss;
  onOutboxCommitted(undefined);
  onLifeRunQueued(undefined);
  boss = undefined;
  starting = undefined;
  await b?.stop({ graceful: true, wait: true, timeout: 10_000 });
}

/**
 * Queues the delivery of these outbox messages now (call after their transaction has
 * committed). Never throws: whatever is not queued here, the sweep queues within a few
 * minutes. Does nothing when the queue is not running in this process.
 */
export async function kickMailDelivery(outboxIds: readonly string[]): Promise<number> {
  const b = boss;
  if (!b || outboxIds.length === 0) return 0;
  const handed: string[] = [];
  let created = 0;
  for (const id of new Set(outboxIds)) {
    try {
      const jobId = await b.send(
        QUEUES.deliver,
        { outboxId: id },
        { singletonKey: id, singletonSeconds: DELIVER_SINGLETON_SECONDS },
      );
      handed.push(id);
      if (jobId) created += 1;
    } catch (error) {
      log(`could not queue e-mail ${id} (the sweep will): ${(error as Error).message}`);
    }
  }
  if (handed.length) {
    await markOutboxQueued(db(), handed).catch((error: Error) =>
      log(`could not note queued e-mails: ${error.message}`),
    );
  }
  return created;
}

/** The minute sweep: queues unsent messages that have no live delivery job. Returns how many it queued. */
export async function sweepOutbox(): Promise<number> {
  const ids = await outboxLeftBehind(db(), {
    maxAttempts: OUTBOX_MAX_ATTEMPTS,
    requeueAfter: REQUEUE_AFTER,
    jobTable: `${SCHEMA}.job`,
    jobName: QUEUES.deliver,
    limit: SWEEP_BATCH,
  });
  return ids.length ? kickMailDelivery(ids) : 0;
}

/** Queues the jobs of these recompute runs (after their rows committed). Never throws: the sweep catches up. */
export async function kickLifeRuns(runIds: readonly string[]): Promise<number> {
  const b = boss;
  if (!b || runIds.length === 0) return 0;
  let created = 0;
  for (const id of new Set(runIds)) {
    try {
      if (await b.send(QUEUES.lifeRecompute, { runId: id }, { singletonKey: id, singletonSeconds: 300 })) created += 1;
    } catch (error) {
      log(`could not queue recompute run ${id} (the sweep will): ${(error as Error).message}`);
    }
  }
  return created;
}
