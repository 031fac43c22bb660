import { randomUUID } from "node:crypto";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import {
  auditCsvStream,
  auditPage,
  lastFullVerification,
  recordAudit,
  runFullAuditVerification,
  verifyAuditSinceCheckpoint,
  type Actor,
} from "../../app/models/audit.server";
import { attachmentForViewing } from "../../app/models/attachments.server";
import { coveredSiteIds } from "../../app/models/contract-coverage.server";
import { getContract, updateContract, endContract } from "../../app/models/contracts.server";
import { recordExchange } from "../../app/models/exposures.server";
import { saveLabResult, type LabInputs } from "../../app/models/lab-results.server";
import { ownerSettingsVersion, saveOwnerSettings } from "../../app/models/owner-settings.server";
import { pruneExpiredSessions } from "../../app/models/sessions.server";
import {
  listSubmissions,
  parseSubmissionCursor,
  submissionsPage,
  submitForReview,
} from "../../app/models/submissions.server";
import { Conflict } from "../../app/services/outcome";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, type World } from "../helpers/fixtures";

let db: TestDatabase;
let w: World;
const system: Actor = { userId: null, organisationId: null, label: "test" };
const iso = (daysAgo: number) => new Date(Date.now() - daysAgo * 86_400_000).toISOString();
const lab = (): LabInputs => ({
  cleaningMethod: "inhibited HCl",
  couponMassesG: [35.8, 35.7985, 35.797],
  finalMassG: null,
  blankInitialMassG: 36.2,
  blankMassesG: [36.1986, 36.1971, 36.1957],
  baseMetalFromCycle: null,
  pitDepthsMm: [0.11, 0.08],
  labNotes: "",
});

beforeAll(async () => {
  db = await createTestDatabase();
  w = await buildWorld(db.knex);
});
afterAll(async () => {
  await db?.drop();
});

/** Appends `n` events to an owner's trail in one statement (the trigger chains each). */
async function appendEvents(ownerId: string, n: number, recordId = "bulk") {
  await db.knex.raw(
    `insert into audit_events (owner_id, actor_label, action, record_type, record_id, after, hash)
     select ?, 'bulk', 'note.added', 'note', ?, jsonb_build_object('n', g), '' from generate_series(1, ?) g`,
    [ownerId, recordId, n],
  );
}

/** Edits one event behind the app's back, as someone with the table owner's rights could. */
async function tamper(eventId: string) {
  await db.knex.transaction(async (trx) => {
    await trx.raw("alter table audit_events disable trigger audit_events_append_only");
    await trx.raw("grant update on audit_events to current_user");
    await trx("audit_events").where({ id: eventId }).update({ actor_label: "someone else" });
    await trx.raw("alter table audit_events enable trigger audit_events_append_only");
  });
}

describe("the audit trail at size", () => {
  it("pages newest first in SQL: older and newer pages meet without repeats or gaps, filters kept", async () => {
    const owner = w.owner2.id;
    await appendEvents(owner, 23, "paged");
    await appendEvents(owner, 5, "other");
    const all = (
      await db.knex("audit_events").where({ owner_id: owner, record_id: "paged" }).orderBy("id", "desc")
    ).map((e: { id: string }) => String(e.id));
    const filter = { recordType: "note", recordId: "paged" };
    const walked: string[] = [];
    let page = await auditPage(db.knex, owner, filter, { limit: 5 });
    expect(page.newer).toBeNull();
    const pages = [page];
    walked.push(...page.events.map((e) => String(e.id)));
    while (page.older) {
      page = await auditPage(db.knex, owner, filter, { limit: 5, before: page.older });
      pages.push(page);
      walked.push(...page.events.map((e) => String(e.id)));
    }
    expect(walked).toEqual(all);
    expect(pages).toHaveLength(5);
    expect(page.older).toBeNull();
    // Back towards the newest with "newer": the same pages in reverse.
    const back: string[][] = [];
    let current = pages[pages.length - 1];
    while (current.newer) {
      current = await auditPage(db.knex, owner, filter, { limit: 5, after: current.newer });
      back.push(current.events.map((e) => String(e.id)));
    }
    expect(back).toEqual(
      pages
        .slice(0, -1)
        .reverse()
        .map((p) => p.events.map((e) => String(e.id))),
    );
    expect(await auditPage(db.knex, owner, filter, { limit: 5, before: "not-an-id" })).toMatchObject({
      events: pages[0].events,
    });
  });

  it("verifies only events after the checkpoint on a view; the full check finds tampering before it", async () => {
    const owner = w.owner2.id;
    const first = await verifyAuditSinceCheckpoint(db.knex, owner);
    const total = Number((await db.knex("audit_events").where({ owner_id: owner }).count({ n: "*" }).first())!.n);
    expect(first).toEqual({ verified: total, checked: total, pending: false, broken: [] });
    await appendEvents(owner, 3, "later");
    expect(await verifyAuditSinceCheckpoint(db.knex, owner)).toEqual({
      verified: total + 3,
      checked: 3,
      pending: false,
      broken: [],
    });
    // An event before the checkpoint is edited: a view does not re-hash it …
    const victim = await db.knex("audit_events").where({ owner_id: owner }).orderBy("id").offset(2).first("id");
    await tamper(victim.id);
    expect((await verifyAuditSinceCheckpoint(db.knex, owner)).broken).toEqual([]);
    // … the full re-verification does, keeps its result, and moves the checkpoint back before it.
    const [report] = await runFullAuditVerification(db.knex, owner, { batchSize: 7 });
    expect(report.broken).toEqual([{ id: String(victim.id), problem: "content does not match its hash (edited)" }]);
    const full = await lastFullVerification(db.knex, owner);
    expect(full).toMatchObject({ events: total + 3, brokenIds: [String(victim.id)] });
    const view = await verifyAuditSinceCheckpoint(db.knex, owner);
    expect(view.verified).toBe(2);
    expect(view.broken.map((b) => b.id)).toEqual([String(victim.id)]);
  });

  it("streams the whole filtered trail as CSV, past 10,000 events, in batches", async () => {
    const owner = w.owner.id;
    await appendEvents(owner, 10_050, "many");
    await recordAudit(db.knex, {
      ownerId: owner,
      actor: system,
      action: "note.added",
      recordType: "note",
      recordId: "elsewhere",
    });
    const read = async (filter: { recordType?: string; recordId?: string }, batchSize?: number) => {
      const text = await new Response(auditCsvStream(db.knex, owner, filter, { batchSize })).text();
      return text.split("\r\n").filter(Boolean);
    };
    const lines = await read({ recordId: "many" });
    expect(lines[0]).toBe("id,created_at,actor,action,record_type,record_id,reason,before,after,hash");
    expect(lines).toHaveLength(10_051);
    const ids = lines.slice(1).map((l) => Number(l.split(",")[0]));
    expect(new Set(ids).size).toBe(10_050);
    expect(ids).toEqual([...ids].sort((a, b) => b - a));
    // A batch size that divides the count exactly still ends, with every row once.
    expect(await read({ recordId: "many" }, 1005)).toEqual(lines);
    expect(await read({ recordId: "nothing" })).toHaveLength(1);
    const everything = Number((await db.knex("audit_events").where({ owner_id: owner }).count({ n: "*" }).first())!.n);
    expect(await read({})).toHaveLength(everything + 1);
    const [report] = await runFullAuditVerification(db.knex, owner);
    expect(report).toMatchObject({ events: everything, broken: [] });
  });
});

describe("submission cursors", () => {
  it("walks both orders one row at a time through rows sharing one instant, without repeats or gaps", async () => {
    const shared = "2026-11-20T10:00:00.123456Z";
    const rows = await db
      .knex("submissions")
      .insert(
        ["a", "b", "c", "d"].map((x, i) => ({
          owner_id: w.owner.id,
          site_id: w.site2.id,
          contractor_id: w.monitoring.id,
          kind: "coupon",
          status: "submitted",
          reference: `PB-SUB-TIE-${x}`,
          created_at: shared,
          // one row a microsecond later: a millisecond cursor would lose it
          submitted_at: i === 3 ? "2026-11-20T10:00:00.123457Z" : shared,
        })),
      )
      .returning("id");
    const expected = rows.map((r: { id: string }) => r.id);
    for (const order of ["oldest", "newest"] as const) {
      const seen: string[] = [];
      let cursor: string | null = null;
      for (let step = 0; step < 20; step++) {
        const page: Awaited<ReturnType<typeof listSubmissions>> = await listSubmissions(
          db.knex,
          w.users.engineer,
          { siteId: w.site2.id, order },
          { limit: 1, cursor: cursor ? parseSubmissionCursor(cursor)! : undefined },
        );
        seen.push(...page.items.map((i) => i.id));
        cursor = page.nextCursor;
        if (!cursor) break;
      }
      expect(cursor).toBeNull();
      expect(seen).toHaveLength(4);
      expect(new Set(seen)).toEqual(new Set(expected));
      // The later row comes last oldest first, first newest first.
      expect(order === "oldest" ? seen[3] : seen[0]).toBe(expected[3]);
    }
  });

  it("pages the submissions screen on the server with a count, past 200", async () => {
    await db.knex.raw(
      `insert into submissions (owner_id, site_id, contractor_id, kind, status, reference, submitted_at)
       select ?, ?, ?, 'coupon', 'approved', 'PB-SUB-BULK-' || g, now() - make_interval(mins => g)
         from generate_series(1, 260) g`,
      [w.owner.id, w.site2.id, w.monitoring.id],
    );
    const filters = { status: "approved" };
    const first = await submissionsPage(db.knex, w.users.engineer, filters, { number: 1, size: 50 });
    expect(first.total).toBe(260);
    expect(first.items.map((i) => i.reference).slice(0, 2)).toEqual(["PB-SUB-BULK-1", "PB-SUB-BULK-2"]);
    const seen = new Set<string>();
    for (let n = 1; n <= 6; n++)
      for (const i of (await submissionsPage(db.knex, w.users.engineer, filters, { number: n, size: 50 })).items)
        seen.add(i.id);
    expect(seen.size).toBe(260);
    // Past the end: the last page (10 rows); another owner's engineer counts none.
    expect(await submissionsPage(db.knex, w.users.engineer, filters, { number: 99, size: 50 })).toMatchObject({
      number: 6,
      total: 260,
    });
    expect((await submissionsPage(db.knex, w.users.engineer2, filters, { number: 1, size: 50 })).total).toBe(0);
  });

  it("reads only cursors PostgreSQL reads back exactly", () => {
    const id = "7d3c1a52-4a4b-4c7e-9d1e-2f6a8b9c0d1e";
    expect(parseSubmissionCursor(`2026-11-20T10:00:00.123456Z|${id}`)).toEqual({
      at: "2026-11-20T10:00:00.123456Z",
      id,
    });
    for (const bad of [
      `+275760-09-13T00:00:00.000Z|${id}`,
      `275760-09-13T00:00:00.000000Z|${id}`,
      `2026-02-30T10:00:00.000000Z|${id}`,
      `2026-11-20T24:00:00.000000Z|${id}`,
      `2026-11-20T10:00:00.123Z|${id}`,
      `0000-01-01T00:00:00.000000Z|${id}`,
      "2026-11-20T10:00:00.123456Z|not-a-uuid",
      "garbage",
      `2026-11-20T10:00:00.123456Z|${id}|extra`,
    ])
      expect(parseSubmissionCursor(bad)).toBeNull();
  });
});

describe("writes under contention", () => {
  it("keeps one open draft per contractor and site when two saves race, and one of two submits wins", async () => {
    const exposures: string[] = [];
    for (const [i, point] of [w.point, w.point2].entries()) {
      await w.coupon(`R-${i}-A`);
      await w.coupon(`R-${i}-B`);
      await recordExchange(db.knex, w.users.tech, point, { installSerial: `R-${i}-A`, installedAt: iso(95) });
      await recordExchange(db.knex, w.users.tech, point, {
        removedAt: iso(2),
        installSerial: `R-${i}-B`,
        installedAt: iso(2),
      });
      const e = await db
        .knex("coupon_exposures as e")
        .join("coupons as c", "c.id", "e.coupon_id")
        .where("c.serial", `R-${i}-A`)
        .first("e.id");
      exposures.push(e.id);
    }
    const saved = await Promise.all(exposures.map((id) => saveLabResult(db.knex, w.users.tech, id, lab())));
    expect(saved[0].submissionId).toBe(saved[1].submissionId);
    const drafts = await db.knex("submissions").where({ site_id: w.site.id, status: "draft" }).count({ n: "*" });
    expect(Number(drafts[0].n)).toBe(1);
    // The database refuses a second open draft outright.
    await expect(
      db.knex("submissions").insert({
        owner_id: w.owner.id,
        site_id: w.site.id,
        contractor_id: w.monitoring.id,
        kind: "coupon",
        status: "draft",
        reference: "PA-SUB-DUP",
      }),
    ).rejects.toMatchObject({ constraint: "submissions_one_open_draft" });

    const results = await Promise.allSettled([
      submitForReview(db.knex, w.users.tech, saved[0].submissionId),
      submitForReview(db.knex, w.users.tech, saved[0].submissionId),
    ]);
    expect(results.filter((r) => r.status === "fulfilled")).toHaveLength(1);
    const refused = results.find((r) => r.status === "rejected") as PromiseRejectedResult;
    expect(refused.reason).toBeInstanceOf(Conflict);
    const revisions = await db.knex("submission_revisions").where({ submission_id: saved[0].submissionId });
    expect(revisions).toHaveLength(1);
  });

  it("refuses a contract edit or end made from a stale page (409), and accepts the current version", async () => {
    const contract = await db.knex("contracts").where({ contractor_id: w.monitoring.id }).first("id");
    const current = (await getContract(db.knex, w.owner.id, contract.id))!;
    const terms = {
      siteIds: [w.site.id],
      scope: ["coupon_monitoring"],
      startsOn: current.starts_on,
      endsOn: w.shift(300),
      version: String(current.version),
    };
    expect(await updateContract(db.knex, w.users.admin, contract.id, terms)).toEqual({ changed: true });
    await expect(
      updateContract(db.knex, w.users.admin, contract.id, { ...terms, endsOn: w.shift(200) }),
    ).rejects.toThrow(Conflict);
    await expect(
      endContract(db.knex, w.users.admin, contract.id, { endsOn: w.shift(100), version: String(current.version) }),
    ).rejects.toThrow(/changed by someone else/);
    const now = (await getContract(db.knex, w.owner.id, contract.id))!;
    expect(now.version).toBe(current.version + 1);
    expect(now.ends_on).toBe(w.shift(300));
  });

  it("refuses an owner-settings save made from a stale page (409)", async () => {
    const v0 = await ownerSettingsVersion(db.knex, w.owner2.id);
    expect(v0).toBe(0);
    const form = { minimum_exposure_days: "30", photos_required: "off", version: String(v0) };
    await saveOwnerSettings(db.knex, w.owner2.id, system, form);
    const v1 = await ownerSettingsVersion(db.knex, w.owner2.id);
    expect(v1).toBe(1);
    await expect(
      saveOwnerSettings(db.knex, w.owner2.id, system, { ...form, minimum_exposure_days: "40" }),
    ).rejects.toThrow(Conflict);
    await saveOwnerSettings(db.knex, w.owner2.id, system, { ...form, minimum_exposure_days: "40", version: "1" });
    expect(await ownerSettingsVersion(db.knex, w.owner2.id)).toBe(2);
  });
});

describe("contracts in force by the site's calendar", () => {
  const zones = { auckland: "Pacific/Auckland", losAngeles: "America/Los_Angeles" };
  const localDate = (zone: string, at = new Date()) =>
    new Intl.DateTimeFormat("en-CA", { timeZone: zone, year: "numeric", month: "2-digit", day: "2-digit" }).format(at);

  it("reads a site's date in its zone around midnight UTC", async () => {
    const [nz, la] = await db
      .knex("sites")
      .insert([
        { owner_id: w.owner.id, name: "Harbour", code: "HB", time_zone: zones.auckland },
        { owner_id: w.owner.id, name: "Coast", code: "CO", time_zone: zones.losAngeles },
      ])
      .returning("id");
    const at = async (site: string, instant: string) =>
      (await db.knex.raw("select site_today(?, ?)::text as d", [site, instant])).rows[0].d;
    // 23:30 UTC on 4 Dec: already the 5th in Auckland (UTC+13), still the 4th in Los Angeles (UTC-8).
    expect(await at(nz.id, "2026-12-04T23:30:00Z")).toBe("2026-12-05");
    expect(await at(la.id, "2026-12-04T23:30:00Z")).toBe("2026-12-04");
    // 00:30 UTC on 5 Dec: the 5th in Auckland, the 4th in Los Angeles (16:30).
    expect(await at(nz.id, "2026-12-05T00:30:00Z")).toBe("2026-12-05");
    expect(await at(la.id, "2026-12-05T00:30:00Z")).toBe("2026-12-04");
    // 10:59 UTC on 4 Dec: 23:59 in Auckland on the 4th; 10:59 UTC on the 5th is Los Angeles' 02:59 of the 5th.
    expect(await at(nz.id, "2026-12-04T10:59:00Z")).toBe("2026-12-04");
    expect(await at(la.id, "2026-12-05T10:59:00Z")).toBe("2026-12-05");
  });

  it("covers a site from its own first day to its own last day", async () => {
    const contractor = (
      await db.knex("organisations").insert({ name: "Tz Co", kind: "contractor" }).returning("id")
    )[0];
    const sites = await db
      .knex("sites")
      .insert([
        { owner_id: w.owner.id, name: "North", code: "NZ1", time_zone: zones.auckland },
        { owner_id: w.owner.id, name: "West", code: "LA1", time_zone: zones.losAngeles },
      ])
      .returning("id");
    const covered = async () =>
      (await coveredSiteIds(db.knex, contractor.id)).map((r: { site_id: string }) => r.site_id).sort();
    // A contract that starts and ends on "today" by Auckland's calendar, at both sites.
    const day = localDate(zones.auckland);
    const [c] = await db
      .knex("contracts")
      .insert({
        owner_id: w.owner.id,
        contractor_id: contractor.id,
        reference: "TZ-1",
        scope: ["coupon_monitoring"],
        starts_on: day,
        ends_on: day,
      })
      .returning("id");
    await db.knex("contract_sites").insert(sites.map((s: { id: string }) => ({ contract_id: c.id, site_id: s.id })));
    const expected = [sites[0].id, ...(localDate(zones.losAngeles) === day ? [sites[1].id] : [])].sort();
    expect(await covered()).toEqual(expected);
    // Starting and ending on Los Angeles' today instead: Auckland is covered only when its date is the same.
    await db
      .knex("contracts")
      .where({ id: c.id })
      .update({ starts_on: localDate(zones.losAngeles), ends_on: localDate(zones.losAngeles) });
    const la = localDate(zones.losAngeles);
    expect(await covered()).toEqual([sites[1].id, ...(localDate(zones.auckland) === la ? [sites[0].id] : [])].sort());
  });
});

describe("attachments for people and contracts that lapsed", () => {
  it("gives no link to a disabled person or to a contractor whose contract has ended", async () => {
    const e = await db.knex("coupon_exposures").whereNotNull("removed_at").first("id", "owner_id");
    const attachmentId = randomUUID();
    const [a] = await db
      .knex("attachments")
      .insert({
        id: attachmentId,
        owner_id: e.owner_id,
        exposure_id: e.id,
        kind: "as_removed",
        content_type: "image/png",
        byte_size: 10,
        sha256: "0".repeat(64),
        object_key: db.knex.raw("'owners/' || ?::text || '/exposures/' || ?::text || '/' || ?::text || '/original'", [
          e.owner_id,
          e.id,
          attachmentId,
        ]),
        original_name: "pho\u202Egnp.exe\u0001\u001f note.png",
        state: "stored",
        uploaded_by: w.users.tech.id,
        uploaded_by_organisation_id: w.monitoring.id,
      })
      .returning("id");
    const seen = await attachmentForViewing(db.knex, w.users.tech, a.id);
    expect(seen?.name).toBe("phognp.exe note.png");
    await db.knex("users").where({ id: w.users.tech.id }).update({ status: "disabled" });
    expect(await attachmentForViewing(db.knex, w.users.tech, a.id)).toBeNull();
    await db.knex("users").where({ id: w.users.tech.id }).update({ status: "active" });
    await db
      .knex("contracts")
      .where({ contractor_id: w.monitoring.id })
      .update({ ends_on: w.shift(-2), starts_on: w.shift(-400) });
    expect(await attachmentForViewing(db.knex, w.users.tech, a.id)).toBeNull();
    expect(await attachmentForViewing(db.knex, w.users.engineer, a.id)).not.toBeNull();
  });
});

describe("sessions", () => {
  it("prunes expired sessions and those of people no longer active, in batches", async () => {
    const mk = (user: string, expires: string, seen = "now()") =>
      db.knex.raw(
        `insert into sessions (id_hash, user_id, created_at, expires_at, last_seen_at) values (md5(random()::text), ?, now() - interval '60 days', ${expires}, ${seen})`,
        [user],
      );
    await mk(w.users.engineer.id, "now() - interval '1 hour'");
    await mk(w.users.engineer.id, "now() + interval '1 day'", "now() - interval '30 days'");
    await mk(w.users.engineer.id, "now() + interval '1 day'");
    await mk(w.users.manager.id, "now() + interval '1 day'");
    await mk(w.users.manager.id, "now() + interval '1 day'");
    await db.knex("users").where({ id: w.users.manager.id }).update({ status: "disabled" });
    expect(await pruneExpiredSessions(db.knex, 2)).toBe(4);
    expect(await db.knex("sessions").count({ n: "*" })).toEqual([{ n: "1" }]);
  });
});
