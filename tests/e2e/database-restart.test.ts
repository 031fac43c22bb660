import PgBoss from "pg-boss";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { startPrivateCluster, type PrivateCluster } from "../helpers/cluster";
import { startAppProcess, type AppProcess } from "../helpers/e2e";
import { buildWorld, type World } from "../helpers/fixtures";
import { sessionCookieFor } from "../helpers/session";

/**
 * PostgreSQL stopped (pg_ctl stop -m fast) and started again under a stream of saves,
 * with the app process left running. The cluster is this file's own (the runner's shared
 * one is never restarted).
 *
 * During the outage pages answer 503 with words and Retry-After, /api/v1 answers
 * problem+json 503; nothing answers 500 or takes longer than the bound. Afterwards the
 * same process saves again and its job queue still delivers; every acknowledged save is
 * in the database with its audit event, and no refused save is there half-written.
 */

/** No request may take longer than this (connect 3 s + acquire 5 s + margin). */
const BOUND_MS = 15_000;
const WRITERS = 3;

type Answer = { what: string; status: number; ms: number; retryAfter: string | null; type: string; body: string };

let cluster: PrivateCluster;
let app: AppProcess;
let w: World;
let cookie: string;

beforeAll(async () => {
  cluster = await startPrivateCluster();
  w = await buildWorld(cluster.database.knex);
  app = await startAppProcess(cluster.database, { LOG_REQUESTS: "false" });
  cookie = await sessionCookieFor(cluster.database.knex, w.users.admin.id);
}, 120_000);
afterAll(async () => {
  await app?.stop();
  await cluster?.remove();
});

async function timed(what: string, url: string, init: RequestInit = {}): Promise<Answer> {
  const started = Date.now();
  try {
    const res = await fetch(url, {
      ...init,
      headers: { Cookie: cookie, ...(init.headers as Record<string, string> | undefined) },
      redirect: "manual",
      signal: AbortSignal.timeout(BOUND_MS),
    });
    const body = await res.text();
    return {
      what,
      status: res.status,
      ms: Date.now() - started,
      retryAfter: res.headers.get("retry-after"),
      type: res.headers.get("content-type") ?? "",
      body,
    };
  } catch (error) {
    // A hang past the bound or a dropped connection: recorded, and the test fails on it.
    return { what, status: 0, ms: Date.now() - started, retryAfter: null, type: "", body: String(error) };
  }
}

const saveSite = (code: string) =>
  timed(code, `${app.url}/setup`, {
    method: "POST",
    headers: { "Content-Type": "application/x-www-form-urlencoded" },
    body: new URLSearchParams({ intent: "createSite", name: `Outage test site ${code}`, code, time_zone: "UTC" }),
  });

describe("PostgreSQL restarted under a stream of saves", () => {
  it("answers 503 during the outage, recovers by itself and loses no acknowledged save", async () => {
    const saves: Answer[] = [];
    const probes: Answer[] = [];
    let phase: "before" | "outage" | "after" = "before";
    let stopping = false;
    const acks = (p: typeof phase) =>
      saves.filter((s) => s.status === 302 && s.what.includes(`-${p[0].toUpperCase()}`)).length;

    const writer = async (n: number) => {
      for (let i = 0; !stopping; i++) {
        const code = `W${n}-${phase[0].toUpperCase()}${String(i).padStart(4, "0")}`;
        saves.push(await saveSite(code));
        if (phase === "outage") await new Promise((r) => setTimeout(r, 50));
      }
    };
    const writers = Array.from({ length: WRITERS }, (_, n) => writer(n + 1));
    const waitFor = async (ok: () => boolean, ms: number) => {
      const deadline = Date.now() + ms;
      while (!ok() && Date.now() < deadline) await new Promise((r) => setTimeout(r, 100));
    };

    await waitFor(() => saves.filter((s) => s.status === 302).length >= 6, 30_000);
    phase = "outage";
    await cluster.stop();
    // While it is down: a page, an API call and the saves all answer 503.
    await new Promise((r) => setTimeout(r, 1_000));
    probes.push(await timed("page", `${app.url}/setup`));
    probes.push(await timed("api", `${app.url}/api/v1/me`));
    probes.push(await timed("api-list", `${app.url}/api/v1/submissions`));
    // A client-side navigation's data request.
    probes.push(await timed("data", `${app.url}/setup.data`));
    await new Promise((r) => setTimeout(r, 1_500));
    await cluster.start();
    const restartedAt = Date.now();
    phase = "after";
    await waitFor(() => acks("after") >= 6, 60_000);
    stopping = true;
    await Promise.all(writers);

    // Nothing but "saved" (302) or "unavailable" (503); nothing beyond the bound.
    const odd = saves.filter((s) => s.status !== 302 && s.status !== 503);
    expect(odd.map((s) => `${s.what} ${s.status} ${s.body.slice(0, 300)}`)).toEqual([]);
    expect(Math.max(...saves.map((s) => s.ms), ...probes.map((p) => p.ms))).toBeLessThan(BOUND_MS);
    const refused = saves.filter((s) => s.status === 503);
    expect(refused.length).toBeGreaterThan(0);
    for (const r of refused) {
      expect(r.retryAfter).toBe("10");
      expect(r.type).toMatch(/text\/html/);
      expect(r.body).toContain("Wallcast cannot reach its database just now");
    }
    const [page, api, apiList, dataRequest] = probes;
    expect({ status: dataRequest.status, retryAfter: dataRequest.retryAfter }).toEqual({
      status: 503,
      retryAfter: "10",
    });
    expect({ status: page.status, retryAfter: page.retryAfter, type: page.type }).toEqual({
      status: 503,
      retryAfter: "10",
      type: expect.stringMatching(/text\/html/),
    });
    expect(page.body).toContain("Wallcast cannot reach its database just now");
    for (const p of [api, apiList]) {
      expect({ status: p.status, retryAfter: p.retryAfter, type: p.type }).toEqual({
        status: 503,
        retryAfter: "10",
        type: expect.stringMatching(/application\/problem\+json/),
      });
      expect(JSON.parse(p.body)).toMatchObject({
        status: 503,
        title: "Service unavailable",
        requestId: expect.any(String),
      });
    }
    // The same process saves again after the restart.
    expect(acks("after")).toBeGreaterThanOrEqual(6);

    // Every acknowledged save is there, each site with its one audit event; a refused
    // save is either absent or whole (its commit may have landed as the connection was cut).
    const knex = cluster.database.knex;
    const stored: Array<{ code: string; events: string }> = await knex("sites as s")
      .leftJoin("audit_events as a", (j) =>
        j.on("a.record_id", knex.raw("s.id::text")).andOnVal("a.action", "site.created"),
      )
      .where("s.owner_id", w.owner.id)
      .where("s.code", "like", "W%")
      .groupBy("s.code")
      .select("s.code", knex.raw("count(a.id)::text as events"));
    const byCode = new Map(stored.map((r) => [r.code, Number(r.events)]));
    const acknowledged = saves.filter((s) => s.status === 302).map((s) => s.what);
    expect(acknowledged.filter((code) => !byCode.has(code))).toEqual([]);
    expect(stored.filter((r) => Number(r.events) !== 1)).toEqual([]);
    const orphanEvents = await knex("audit_events as a")
      .leftJoin("sites as s", (j) => j.on("a.record_id", knex.raw("s.id::text")))
      .where("a.action", "site.created")
      .where("a.owner_id", w.owner.id)
      .whereNull("s.id")
      .count<Array<{ n: string }>>({ n: "*" });
    expect(Number(orphanEvents[0].n)).toBe(0);
    // Nothing was saved that no request asked for.
    const asked = new Set(saves.map((s) => s.what));
    expect(stored.filter((r) => !asked.has(r.code))).toEqual([]);

    // The job queue of the same process works again: a delivery queued now is sent.
    const subject = `After the restart ${restartedAt}`;
    const [outbox] = await knex("email_outbox")
      .insert({
        event_key: `restart-check:${restartedAt}`,
        to_email: "restart@one.test",
        subject,
        html: "<p>The queue is back.</p>",
        text: "The queue is back.",
      })
      .returning("id");
    const boss = new PgBoss({
      connectionString: cluster.database.url,
      schema: "pgboss",
      supervise: false,
      schedule: false,
      migrate: false,
    });
    await boss.start();
    await boss.send("mail.deliver", { outboxId: outbox.id }, { singletonKey: outbox.id });
    await boss.stop({ graceful: false, wait: true });
    let sent: { sent_at: Date | null } | undefined;
    const deadline = Date.now() + 30_000;
    while (Date.now() < deadline) {
      sent = await knex("email_outbox").where({ id: outbox.id }).first("sent_at");
      if (sent?.sent_at) break;
      await new Promise((r) => setTimeout(r, 250));
    }
    const job = await knex("pgboss.job")
      .where({ name: "mail.deliver", singleton_key: outbox.id })
      .first("state", "output");
    const queueLines = app
      .output()
      .split("\n")
      .filter((l) => /jobs:|Background/.test(l))
      .slice(-40)
      .join("\n");
    expect(sent?.sent_at, `${JSON.stringify(job)}\n${queueLines}`).toBeInstanceOf(Date);
    const inbox = (await (
      await fetch(`${process.env.FAKE_MAIL_URL}/emails?to=${encodeURIComponent("restart@one.test")}`)
    ).json()) as { data: Array<{ subject: string }> };
    expect(inbox.data.filter((m) => m.subject === subject)).toHaveLength(1);
  }, 180_000);
});
