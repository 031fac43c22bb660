import type { Db } from "../services/db.server";

/**
 * The change feed of approved results for the owner's systems: each coupon result and
 * thickness reading as it became approved, and again when a correction superseded it (with
 * the submission and the item that replaced it). Rows are written by a trigger on the
 * submission's status (`result_changes`), read in (transaction id, sequence) order and only
 * up to the oldest transaction still running, so a change committed late can never fall
 * behind a cursor already handed out, and a page is the same whatever is inserted meanwhile.
 *
 * Three queries a page: the changes, then the coupon results and the readings they name.
 */

export type FeedCursor = { xid: string; seq: string };

const cursorPattern = /^(\d{1,20}):(\d{1,19})$/;

/** A cursor is exactly what this feed handed out: "<xid>:<seq>" in base64url. */
export function parseFeedCursor(text: string): FeedCursor | null {
  if (!/^[A-Za-z0-9_-]{1,100}$/.test(text)) return null;
  const m = cursorPattern.exec(Buffer.from(text, "base64url").toString("utf8"));
  if (!m) return null;
  // xid8 is unsigned 64-bit, seq a positive bigint
  if (BigInt(m[1]) > 18446744073709551615n || BigInt(m[2]) > 9223372036854775807n) return null;
  return { xid: m[1], seq: m[2] };
}

const cursorOf = (c: FeedCursor) => Buffer.from(`${c.xid}:${c.seq}`, "utf8").toString("base64url");

type ChangeRow = {
  seq: string;
  xid: string;
  kind: "coupon" | "thickness";
  item_id: string;
  status: "approved" | "superseded";
  changed_at: Date;
  submission_id: string;
  reference: string;
  replaced_by_id: string | null;
  replaced_by_reference: string | null;
};

type CouponItemRow = {
  id: string;
  exposure_id: string;
  site_code: string;
  circuit_tag: string;
  point_tag: string;
  serial: string;
  material_code: string;
  installed_at: Date;
  removed_at: Date | null;
  computed: unknown;
  general_severity: string | null;
  pitting_severity: string | null;
  flags: unknown;
};

type ReadingItemRow = {
  id: string;
  cml_id: string;
  site_code: string;
  circuit_tag: string;
  cml_tag: string;
  measured_on: string;
  thickness_mm: string;
  quadrant_readings_mm: string[];
  method: string;
  instrument: string;
  instrument_resolution_mm: string | null;
  flags: unknown;
};

export type FeedItem = {
  change: string;
  kind: "coupon" | "thickness";
  id: string;
  status: "approved" | "superseded";
  changedAt: string;
  submission: { id: string; reference: string };
  supersededBy: { submissionId: string; reference: string; itemId: string | null } | null;
  site: { code: string };
  circuit: { tag: string };
  coupon?: {
    pointTag: string;
    serial: string;
    materialCode: string;
    installedAt: string;
    removedAt: string | null;
    generalSeverity: string | null;
    pittingSeverity: string | null;
    /** The calculation library's result with its calculation basis, as stored when computed. */
    computed: unknown;
    flags: unknown;
  };
  reading?: {
    cmlTag: string;
    measuredOn: string;
    thicknessMm: number;
    quadrantReadingsMm: number[];
    method: string;
    instrument: string;
    instrumentResolutionMm: number | null;
    flags: unknown;
  };
};

export async function resultFeed(
  conn: Db,
  ownerId: string,
  page: { after?: FeedCursor; limit: number; kind?: "coupon" | "thickness" },
): Promise<{ items: FeedItem[]; nextCursor: string | null }> {
  const bindings: Array<string | number> = [ownerId];
  let where = "c.owner_id = ? and c.xid < pg_snapshot_xmin(pg_current_snapshot())";
  if (page.kind) {
    where += " and c.kind = ?";
    bindings.push(page.kind);
  }
  if (page.after) {
    where += " and (c.xid, c.seq) > (?::xid8, ?::bigint)";
    bindings.push(page.after.xid, page.after.seq);
  }
  bindings.push(page.limit);
  const { rows } = await conn.raw<{ rows: ChangeRow[] }>(
    `select c.seq::text as seq, c.xid::text as xid, c.kind, c.item_id, c.status, c.changed_at,
            s.id as submission_id, s.reference, r.id as replaced_by_id, r.reference as replaced_by_reference
       from result_changes c
       join submissions s on s.id = c.submission_id
       left join submissions r on r.id = c.superseded_by_submission_id
      where ${where}
      order by c.xid, c.seq
      limit ?`,
    bindings,
  );

  const couponIds = rows.filter((r) => r.kind === "coupon").map((r) => r.item_id);
  const readingIds = rows.filter((r) => r.kind === "thickness").map((r) => r.item_id);
  const coupons = new Map<string, CouponItemRow>();
  const readings = new Map<string, ReadingItemRow>();
  if (couponIds.length > 0) {
    const { rows: found } = await conn.raw<{ rows: CouponItemRow[] }>(
      `select r.id, r.exposure_id, st.code as site_code, c.tag as circuit_tag, p.tag as point_tag, k.serial,
              k.material_code, e.installed_at, e.removed_at, r.computed, r.general_severity, r.pitting_severity, r.flags
         from coupon_results r
         join coupon_exposures e on e.id = r.exposure_id
         join coupons k on k.id = e.coupon_id
         join monitoring_points p on p.id = e.point_id
         join circuits c on c.id = p.circuit_id
         join sites st on st.id = p.site_id
        where r.id = any(?::uuid[]) and st.owner_id = ?`,
      [couponIds, ownerId],
    );
    for (const r of found) coupons.set(r.id, r);
  }
  if (readingIds.length > 0) {
    const { rows: found } = await conn.raw<{ rows: ReadingItemRow[] }>(
      `select t.id, t.cml_id, st.code as site_code, c.tag as circuit_tag, m.tag as cml_tag,
              to_char(t.measured_on, 'YYYY-MM-DD') as measured_on, t.thickness_mm, t.quadrant_readings_mm, t.method,
              t.instrument, t.instrument_resolution_mm, t.flags
         from thickness_readings t
         join cmls m on m.id = t.cml_id
         join circuits c on c.id = m.circuit_id
         join sites st on st.id = c.site_id
        where t.id = any(?::uuid[]) and m.owner_id = ?`,
      [readingIds, ownerId],
    );
    for (const r of found) readings.set(r.id, r);
  }
  // The item that replaced a superseded one: the correction's result for the same exposure, or its reading at the same CML.
  const replacements = new Map<string, string>();
  const superseded = rows.filter((r) => r.status === "superseded" && r.replaced_by_id);
  if (superseded.length > 0) {
    const { rows: found } = await conn.raw<{ rows: Array<{ old_id: string; new_id: string }> }>(
      `select o.id as old_id, n.id as new_id
         from coupon_results o join coupon_results n on n.exposure_id = o.exposure_id
        where o.id = any(?::uuid[]) and n.submission_id = any(?::uuid[])
       union all
       select o.id, n.id
         from thickness_readings o join thickness_readings n on n.cml_id = o.cml_id
        where o.id = any(?::uuid[]) and n.submission_id = any(?::uuid[])`,
      [
        superseded.filter((r) => r.kind === "coupon").map((r) => r.item_id),
        superseded.map((r) => r.replaced_by_id as string),
        superseded.filter((r) => r.kind === "thickness").map((r) => r.item_id),
        superseded.map((r) => r.replaced_by_id as string),
      ],
    );
    for (const r of found) replacements.set(r.old_id, r.new_id);
  }

  const items: FeedItem[] = [];
  for (const r of rows) {
    const base = {
      change: cursorOf({ xid: r.xid, seq: r.seq }),
      kind: r.kind,
      id: r.item_id,
      status: r.status,
      changedAt: new Date(r.changed_at).toISOString(),
      submission: { id: r.submission_id, reference: r.reference },
      supersededBy:
        r.status === "superseded" && r.replaced_by_id
          ? {
              submissionId: r.replaced_by_id,
              reference: r.replaced_by_reference as string,
              itemId: replacements.get(r.item_id) ?? null,
            }
          : null,
    };
    if (r.kind === "coupon") {
      const c = coupons.get(r.item_id);
      if (!c) continue;
      items.push({
        ...base,
        site: { code: c.site_code },
        circuit: { tag: c.circuit_tag },
        coupon: {
          pointTag: c.point_tag,
          serial: c.serial,
          materialCode: c.material_code,
          installedAt: new Date(c.installed_at).toISOString(),
          removedAt: c.removed_at ? new Date(c.removed_at).toISOString() : null,
          generalSeverity: c.general_severity,
          pittingSeverity: c.pitting_severity,
          computed: c.computed,
          flags: c.flags,
        },
      });
    } else {
      const t = readings.get(r.item_id);
      if (!t) continue;
      items.push({
        ...base,
        site: { code: t.site_code },
        circuit: { tag: t.circuit_tag },
        reading: {
          cmlTag: t.cml_tag,
          measuredOn: t.measured_on,
          thicknessMm: Number(t.thickness_mm),
          quadrantReadingsMm: (t.quadrant_readings_mm ?? []).map(Number),
          method: t.method,
          instrument: t.instrument,
          instrumentResolutionMm: t.instrument_resolution_mm === null ? null : Number(t.instrument_resolution_mm),
          flags: t.flags,
        },
      });
    }
  }
  const last = rows[rows.length - 1];
  // Every page says where to go on — an empty one too, so a client polls from where it stopped.
  const next = last ? cursorOf({ xid: last.xid, seq: last.seq }) : page.after ? cursorOf(page.after) : null;
  return { items, nextCursor: next };
}
