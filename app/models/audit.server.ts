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

/**
 * Appends an event to the owner's trail, inside the caller's transaction so the event
 * and the change it describes commit together. The database fills prev_hash and hash.
 */
export async function recordAudit(trx: Db, e: AuditInput): Promise<void> {
  await trx("audit_events").insert({
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

export async function listAudit(
  conn: Db,
  ownerId: string,
  filter: { recordType?: string; recordId?: string; limit?: number },
): Promise<AuditRow[]> {
  const q = conn("audit_events")
    .where({ owner_id: ownerId })
    .orderBy("id", "desc")
    .limit(Math.min(filter.limit ?? 500, 10_000))
    .select(
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
    );
  if (filter.recordType) q.where("record_type", filter.recordType);
  if (filter.recordId) q.where("record_id", filter.recordId);
  return q;
}

export type ChainReport = { ownerId: string; events: number; broken: Array<{ id: string; problem: string }> };

/**
 * Re-derives every hash of each owner's chain: an edited row no longer matches its
 * hash; a removed row leaves its successor pointing at a hash that is not the
 * previous row's.
 */
export async function verifyAuditChain(conn: Db, ownerId?: string): Promise<ChainReport[]> {
  const rows = (await conn.raw(
    `select e.id::text, e.owner_id, e.prev_hash, e.hash, audit_event_hash(e) as recomputed,
            lag(e.hash) over (partition by e.owner_id order by e.id) as previous
       from audit_events e
      ${ownerId ? "where e.owner_id = ?" : ""}
      order by e.owner_id, e.id`,
    ownerId ? [ownerId] : [],
  )) as {
    rows: Array<{
      id: string;
      owner_id: string;
      prev_hash: string | null;
      hash: string;
      recomputed: string;
      previous: string | null;
    }>;
  };
  const reports = new Map<string, ChainReport>();
  for (const r of rows.rows) {
    let report = reports.get(r.owner_id);
    if (!report) reports.set(r.owner_id, (report = { ownerId: r.owner_id, events: 0, broken: [] }));
    report.events += 1;
    if (r.recomputed !== r.hash) report.broken.push({ id: r.id, problem: "content does not match its hash (edited)" });
    if ((r.prev_hash ?? null) !== (r.previous ?? null))
      report.broken.push({
        id: r.id,
        problem: "does not follow the previous event (an event was removed or reordered)",
      });
  }
  return [...reports.values()];
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
  return toCsv(
    auditCsvHeader,
    rows.map((r) => [
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
    ]),
  );
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
