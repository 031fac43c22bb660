import type { Knex } from "knex";
import type { SessionUser } from "../context";
import type { Db } from "../services/db.server";
import { toCsv } from "../services/csv";
import { Invalid, type FieldErrors } from "../services/outcome";

/** Who acted: a person, an API client, or the system (seed, jobs). */
export type Actor = { userId: string | null; organisationId: string | null; label: string };

export const actorOf = (user: SessionUser): Actor => ({
  userId: user.id,
  organisationId: user.organisation.id,
  label: user.email,
});

export type AuditInput = {
  ownerId: string;
  actor: Actor;
  action: string;
  recordType: string;
  recordId: string;
  before?: unknown;
  after?: unknown;
  reason?: string | null;
  requestId?: string | null;
};

const auditRow = (e: AuditInput) => ({
  owner_id: e.ownerId,
  actor_user_id: e.actor.userId,
  actor_organisation_id: e.actor.organisationId,
  actor_label: e.actor.label,
  action: e.action,
  record_type: e.recordType,
  record_id: e.recordId,
  before: e.before === undefined ? null : JSON.stringify(e.before),
  after: e.after === undefined ? null : JSON.stringify(e.after),
  reason: e.reason ?? null,
  request_id: e.requestId ?? null,
  hash: "", // replaced by the audit_events_chain trigger
});

/**
 * Appends an event to the owner's trail, inside the caller's transaction so the event
 * and the change it describes commit together. The database fills prev_hash and hash.
 */
export async function recordAudit(trx: Db, e: AuditInput): Promise<void> {
  await trx("audit_events").insert(auditRow(e));
}

/**
 * Appends several events, in order, in one statement. The chain stays whole: the
 * audit_events_chain row trigger runs for each row in turn, after the owner's advisory
 * lock, and sees the rows the same statement inserted before it (PostgreSQL shows a
 * BEFORE row trigger the rows its statement has already processed), so each event
 * follows the one before it, as if inserted one by one.
 */
export async function recordAudits(trx: Db, events: AuditInput[]): Promise<void> {
  if (events.length) await trx("audit_events").insert(events.map(auditRow));
}

/** Who writes, for whom, and for which request: what every audited write needs. */
export type AuditContext = { ownerId: string; actor: Actor; requestId?: string | null };

export type AuditedTrx = {
  trx: Knex.Transaction;
  /** Appends an event for this change, in this transaction. */
  record(event: Omit<AuditInput, "ownerId" | "actor" | "requestId">): Promise<void>;
};

type PgError = { code?: string; constraint?: string };

/**
 * The audited-write skeleton every model uses: one transaction, the caller's locked
 * read → diff → write → audit event inside it, and unique-constraint clashes turned into
 * field errors in words (`unique`: constraint name → field errors, or a function
 * that words them from the clashing row). Nothing is written
 * when any step throws.
 */
export async function auditedWrite<T>(
  conn: Db,
  ctx: AuditContext,
  work: (w: AuditedTrx) => Promise<T>,
  unique: Record<string, FieldErrors | (() => Promise<FieldErrors>)> = {},
): Promise<T> {
  try {
    return await conn.transaction(async (trx) =>
      work({
        trx,
        record: (event) =>
          recordAudit(trx, { ...event, ownerId: ctx.ownerId, actor: ctx.actor, requestId: ctx.requestId }),
      }),
    );
  } catch (error) {
    const pg = error as PgError;
    const clash = pg?.code === "23505" && pg.constraint ? unique[pg.constraint] : undefined;
    if (clash) throw new Invalid(typeof clash === "function" ? await clash() : clash);
    throw error;
  }
}

/** The keys whose values differ between two snapshots (compared as JSON). */
export function changedKeys<T extends Record<string, unknown>>(before: T, after: T): Array<keyof T> {
  return (Object.keys(after) as Array<keyof T>).filter((k) => JSON.stringify(before[k]) !== JSON.stringify(after[k]));
}

export type AuditFilter = { recordType?: string; recordId?: string };

/** Event ids are bigint serials; a position in the trail is one of them, as digits. */
const eventIdPattern = /^[1-9]\d{0,17}$/;

function filtered(conn: Db, ownerId: string, filter: AuditFilter): Knex.QueryBuilder {
  const q = conn("audit_events").where({ owner_id: ownerId });
  if (filter.recordType) q.where("record_type", filter.recordType);
  if (filter.recordId) q.where("record_id", filter.recordId);
  return q;
}

const auditColumns = [
  "id",
  "created_at",
  "actor_label",
  "action",
  "record_type",
  "record_id",
  "before",
  "after",
  "reason",
  "hash",
];

export type AuditRow = {
  id: string;
  created_at: Date;
  actor_label: string;
  action: string;
  record_type: string;
  record_id: string;
  before: unknown;
  after: unknown;
  reason: string | null;
  hash: string;
};

/** The newest events of one record's (or the whole) trail, for a record's own page; the audit page pages with `auditPage`. */
export async function listAudit(
  conn: Db,
  ownerId: string,
  filter: AuditFilter & { limit?: number },
): Promise<AuditRow[]> {
  return filtered(conn, ownerId, filter)
    .orderBy("id", "desc")
    .limit(Math.min(filter.limit ?? 500, 1000))
    .select(auditColumns);
}

export type AuditPage = {
  events: AuditRow[];
  /** Pass as `before` for the next older page; null on the oldest page. */
  older: string | null;
  /** Pass as `after` for the next newer page; null on the newest page. */
  newer: string | null;
};

/**
 * One page of the owner's trail, newest first, paged in SQL on the event id: `before`
 * gives the page of events older than that id, `after` the page of events newer than
 * it (still shown newest first). Filters apply to every page.
 */
export async function auditPage(
  conn: Db,
  ownerId: string,
  filter: AuditFilter,
  page: { limit: number; before?: string; after?: string },
): Promise<AuditPage> {
  const limit = Math.max(1, Math.min(page.limit, 1000));
  const before = page.before && eventIdPattern.test(page.before) ? page.before : undefined;
  const after = !before && page.after && eventIdPattern.test(page.after) ? page.after : undefined;
  const q = filtered(conn, ownerId, filter)
    .select(auditColumns)
    .limit(limit + 1);
  if (after) q.where("id", ">", after).orderBy("id", "asc");
  else {
    if (before) q.where("id", "<", before);
    q.orderBy("id", "desc");
  }
  const rows: AuditRow[] = await q;
  const more = rows.length > limit;
  const events = rows.slice(0, limit);
  if (after) events.reverse();
  const newest = events[0]?.id;
  const oldest = events[events.length - 1]?.id;
  // Whether there is anything on the other side of the page (the side not probed by limit + 1).
  const beyond = async (op: ">" | "<", id: string | undefined) =>
    id ? Boolean(await filtered(conn, ownerId, filter).where("id", op, id).first("id")) : false;
  const hasOlder = after ? await beyond("<", oldest ?? after) : more;
  const hasNewer = after ? more : before ? await beyond(">", newest ?? String(BigInt(before) - 1n)) : false;
  return {
    events,
    older: hasOlder && oldest ? oldest : null,
    newer: hasNewer && newest ? newest : null,
  };
}

export type ChainReport = { ownerId: string; events: number; broken: Array<{ id: string; problem: string }> };

type ChainRow = { id: string; prev_hash: string | null; hash: string; recomputed: string };

const editedProblem = "content does not match its hash (edited)";
const unlinkedProblem = "does not follow the previous event (an event was removed or reordered)";

/**
 * The owner's events after `afterId`, oldest first, each with its hash recomputed in
 * the database, at most `limit` of them (one short statement per batch).
 */
async function chainBatch(conn: Db, ownerId: string, afterId: string, limit: number): Promise<ChainRow[]> {
  const { rows } = await conn.raw<{ rows: ChainRow[] }>(
    `select e.id::text as id, e.prev_hash, e.hash, audit_event_hash(e) as recomputed
       from audit_events e
      where e.owner_id = ? and e.id > ?::bigint
      order by e.id
      limit ?`,
    [ownerId, afterId, limit],
  );
  return rows;
}

/** Checks rows that follow an event whose hash is `previous` (null before the first event). */
function checkRows(rows: ChainRow[], previous: string | null, broken: ChainReport["broken"]): string | null {
  let prev = previous;
  for (const r of rows) {
    if (r.recomputed !== r.hash) broken.push({ id: r.id, problem: editedProblem });
    if ((r.prev_hash ?? null) !== prev) broken.push({ id: r.id, problem: unlinkedProblem });
    prev = r.hash;
  }
  return prev;
}

const CHAIN_BATCH = 5000;

async function ownersWithEvents(conn: Db): Promise<string[]> {
  const { rows } = await conn.raw<{ rows: Array<{ owner_id: string }> }>(
    "select distinct owner_id from audit_events order by owner_id",
  );
  return rows.map((r) => r.owner_id);
}

/**
 * Re-derives every hash of each owner's chain, in batches: an edited row no longer
 * matches its hash; a removed row leaves its successor pointing at a hash that is not
 * the previous row's.
 */
export async function verifyAuditChain(
  conn: Db,
  ownerId?: string,
  options: { batchSize?: number } = {},
): Promise<ChainReport[]> {
  const owners = ownerId ? [ownerId] : await ownersWithEvents(conn);
  const reports: ChainReport[] = [];
  for (const owner of owners) {
    const report: ChainReport = { ownerId: owner, events: 0, broken: [] };
    let previous: string | null = null;
    let lastId = "0";
    for (;;) {
      const rows = await chainBatch(conn, owner, lastId, options.batchSize ?? CHAIN_BATCH);
      if (rows.length === 0) break;
      previous = checkRows(rows, previous, report.broken);
      report.events += rows.length;
      lastId = rows[rows.length - 1].id;
    }
    if (report.events > 0 || ownerId) reports.push(report);
  }
  return reports;
}

export type FullVerification = {
  startedAt: string;
  finishedAt: string;
  events: number;
  brokenIds: string[];
  problems: ChainReport["broken"];
};

/**
 * The full re-verification of one owner's trail (or every owner's): every event
 * re-hashed from the first, the result stored in `audit_verifications` (shown on the
 * audit page), and the owner's checkpoint moved to the last event when the trail is
 * intact — or back to just before the first broken event when it is not, so each view
 * shows the break too. Run by the daily job, `npm run audit:verify` and the audit page.
 */
export async function runFullAuditVerification(
  conn: Knex,
  ownerId?: string,
  options: { batchSize?: number } = {},
): Promise<ChainReport[]> {
  const owners = ownerId ? [ownerId] : await ownersWithEvents(conn);
  const reports: ChainReport[] = [];
  for (const owner of owners) {
    const startedAt = new Date();
    const report: ChainReport = { ownerId: owner, events: 0, broken: [] };
    let previous: string | null = null;
    let lastId = "0";
    // The last event before the first break: where the checkpoint may stand.
    let lastGood: { id: string; hash: string; events: number } | null = null;
    for (;;) {
      const rows = await chainBatch(conn, owner, lastId, options.batchSize ?? CHAIN_BATCH);
      if (rows.length === 0) break;
      for (const r of rows) {
        const before = report.broken.length;
        previous = checkRows([r], previous, report.broken);
        report.events += 1;
        if (report.broken.length === before && (lastGood?.events ?? 0) === report.events - 1)
          lastGood = { id: r.id, hash: r.hash, events: report.events };
      }
      lastId = rows[rows.length - 1].id;
    }
    await conn.transaction(async (trx) => {
      await trx("audit_verifications").insert({
        owner_id: owner,
        started_at: startedAt,
        events: report.events,
        broken: JSON.stringify(report.broken),
      });
      if (lastGood)
        await trx.raw(
          `insert into audit_checkpoints (owner_id, event_id, hash, events, verified_at) values (?, ?, ?, ?, now())
           on conflict (owner_id) do update
             set event_id = excluded.event_id, hash = excluded.hash, events = excluded.events, verified_at = now()`,
          [owner, lastGood.id, lastGood.hash, lastGood.events],
        );
      else await trx("audit_checkpoints").where({ owner_id: owner }).delete();
    });
    reports.push(report);
  }
  return reports;
}

/** The newest full re-verification of the owner's trail, or null before the first. */
export async function lastFullVerification(conn: Db, ownerId: string): Promise<FullVerification | null> {
  const row: { started_at: Date; finished_at: Date; events: number; broken: ChainReport["broken"] } | undefined =
    await conn("audit_verifications")
      .where({ owner_id: ownerId })
      .orderBy("id", "desc")
      .first("started_at", "finished_at", "events", "broken");
  if (!row) return null;
  return {
    startedAt: new Date(row.started_at).toISOString(),
    finishedAt: new Date(row.finished_at).toISOString(),
    events: row.events,
    brokenIds: [...new Set(row.broken.map((b) => b.id))],
    problems: row.broken.slice(0, 20),
  };
}

export type IncrementalCheck = {
  /** Events of the trail known intact (up to the checkpoint, after this check). */
  verified: number;
  /** Events re-hashed by this check (those after the previous checkpoint). */
  checked: number;
  /** Events after the checkpoint left for the next check (more than one check takes). */
  pending: boolean;
  broken: ChainReport["broken"];
};

/** At most this many events are re-hashed per view; the rest wait for the next view or the full check. */
const VIEW_CHECK_LIMIT = 20_000;

/**
 * The chain check a view of the trail runs: only the events after the owner's checkpoint
 * are re-hashed, the first of them against the checkpoint's hash; the checkpoint then
 * moves to the last intact event. Tampering before the checkpoint is the full
 * re-verification's to find (`runFullAuditVerification`).
 */
export async function verifyAuditSinceCheckpoint(
  conn: Db,
  ownerId: string,
  options: { limit?: number } = {},
): Promise<IncrementalCheck> {
  const limit = options.limit ?? VIEW_CHECK_LIMIT;
  const point: { event_id: string; hash: string; events: number } | undefined = await conn("audit_checkpoints")
    .where({ owner_id: ownerId })
    .first("event_id", "hash", "events");
  const rows = await chainBatch(conn, ownerId, point?.event_id ?? "0", limit + 1);
  const pending = rows.length > limit;
  const checkedRows = rows.slice(0, limit);
  const broken: ChainReport["broken"] = [];
  let previous = point?.hash ?? null;
  let good = point ? { id: String(point.event_id), hash: point.hash, events: point.events } : null;
  for (const r of checkedRows) {
    const before = broken.length;
    previous = checkRows([r], previous, broken);
    if (broken.length > before) continue;
    if (!broken.length) good = { id: r.id, hash: r.hash, events: (good?.events ?? 0) + 1 };
  }
  if (good && good.id !== String(point?.event_id ?? "")) {
    // Only forward: two views at once both move it, the later event wins.
    await conn.raw(
      `insert into audit_checkpoints (owner_id, event_id, hash, events, verified_at) values (?, ?, ?, ?, now())
       on conflict (owner_id) do update
         set event_id = excluded.event_id, hash = excluded.hash, events = excluded.events, verified_at = now()
         where audit_checkpoints.event_id < excluded.event_id`,
      [ownerId, good.id, good.hash, good.events],
    );
  }
  return { verified: good?.events ?? 0, checked: checkedRows.length, pending, broken };
}

/** The kinds of record that appear in an owner's trail (for the filter). */
export async function auditRecordTypes(conn: Db, ownerId: string): Promise<string[]> {
  const rows = await conn("audit_events").where({ owner_id: ownerId }).distinct("record_type").orderBy("record_type");
  return rows.map((r: { record_type: string }) => r.record_type);
}

export const auditCsvHeader = [
  "id",
  "created_at",
  "actor",
  "action",
  "record_type",
  "record_id",
  "reason",
  "before",
  "after",
  "hash",
];

/** One CSV cell as written in the downloads (guarded and quoted by `toCsv`). */
export function csvCell(value: unknown): string {
  return toCsv([], [[value]]).replace(/\r\n$/, "");
}

/** The trail as CSV: a header row, then one line per event, CRLF line ends. */
export function auditToCsv(rows: AuditRow[]): string {
  return toCsv(auditCsvHeader, rows.map(csvLine));
}

function csvLine(r: AuditRow): unknown[] {
  return [
    r.id,
    new Date(r.created_at).toISOString(),
    r.actor_label,
    r.action,
    r.record_type,
    r.record_id,
    r.reason,
    r.before,
    r.after,
    r.hash,
  ];
}

/**
 * The whole filtered trail as a CSV stream, newest first: the header, then the events in
 * batches read by keyset on the id (one short query each, no transaction held open),
 * up to the newest event when the download started.
 */
export function auditCsvStream(
  conn: Db,
  ownerId: string,
  filter: AuditFilter,
  options: { batchSize?: number } = {},
): ReadableStream<Uint8Array> {
  const batchSize = options.batchSize ?? 1000;
  const encoder = new TextEncoder();
  let cursor: string | null = null;
  let started = false;
  let done = false;
  return new ReadableStream<Uint8Array>({
    async pull(controller) {
      if (!started) {
        started = true;
        const top: { id: string } | undefined = await filtered(conn, ownerId, filter).orderBy("id", "desc").first("id");
        cursor = top ? String(BigInt(top.id) + 1n) : null;
        controller.enqueue(encoder.encode(toCsv(auditCsvHeader, [])));
        if (!cursor) {
          done = true;
          controller.close();
        }
        return;
      }
      if (done || !cursor) return;
      const rows: AuditRow[] = await filtered(conn, ownerId, filter)
        .where("id", "<", cursor)
        .orderBy("id", "desc")
        .limit(batchSize)
        .select(auditColumns);
      if (rows.length) controller.enqueue(encoder.encode(toCsv([], rows.map(csvLine))));
      if (rows.length < batchSize) {
        done = true;
        controller.close();
      } else cursor = rows[rows.length - 1].id;
    },
  });
}

/** A readable name for the record an event is about (an e-mail, a reference, a name), when its values carry one. */
export function auditRecordLabel(before: unknown, after: unknown): string | null {
  for (const side of [after, before]) {
    if (side && typeof side === "object" && !Array.isArray(side)) {
      const v = side as Record<string, unknown>;
      for (const key of ["email", "reference", "name"])
        if (typeof v[key] === "string" && v[key]) return v[key] as string;
    }
  }
  return null;
}

/**
 * The trail's filters from a query string (?type=…&id=…), shared by the page and its
 * CSV so both show the same events. Blank or over-long values are ignored.
 */
export function auditFilterFrom(url: URL): { recordType?: string; recordId?: string } {
  const clean = (v: string | null, max: number) => {
    const t = v?.trim();
    return t && t.length <= max ? t : undefined;
  };
  return { recordType: clean(url.searchParams.get("type"), 60), recordId: clean(url.searchParams.get("id"), 100) };
}
