import type { Db } from "../services/db.server";

/**
 * What an owner's systems need to map their own records onto Wallcast's: the sites (codes,
 * zones) and the monitoring points with their tags (unique per owner), circuit and kind.
 * Owner-scoped in SQL by the caller's owner id; the route has checked who may ask.
 */

export type ApiSite = { id: string; code: string; name: string; timeZone: string };

export async function apiSites(conn: Db, ownerId: string): Promise<ApiSite[]> {
  const rows: Array<{ id: string; code: string; name: string; time_zone: string }> = await conn("sites")
    .where({ owner_id: ownerId })
    .orderBy("code")
    .select("id", "code", "name", "time_zone");
  return rows.map((r) => ({ id: r.id, code: r.code, name: r.name, timeZone: r.time_zone }));
}

export type ApiPoint = {
  id: string;
  tag: string;
  kind: string;
  active: boolean;
  site: { id: string; code: string };
  circuit: { id: string; tag: string };
  unitTag: string;
};

/** A page of the owner's monitoring points ordered by tag (keyset: `afterTag` is the last tag handed out). */
export async function apiPoints(
  conn: Db,
  ownerId: string,
  page: { siteId?: string; kind?: string; afterTag?: string; limit: number },
): Promise<{ items: ApiPoint[]; nextCursor: string | null }> {
  const q = conn("monitoring_points as p")
    .join("sites as s", "s.id", "p.site_id")
    .join("circuits as c", "c.id", "p.circuit_id")
    .join("process_units as u", "u.id", "c.unit_id")
    .where("p.owner_id", ownerId)
    .orderBy("p.tag")
    .limit(page.limit + 1)
    .select(
      "p.id",
      "p.tag",
      "p.kind",
      "p.active",
      "s.id as site_id",
      "s.code as site_code",
      "c.id as circuit_id",
      "c.tag as circuit_tag",
      "u.tag as unit_tag",
    );
  if (page.siteId !== undefined) q.where("p.site_id", page.siteId);
  if (page.kind !== undefined) q.where("p.kind", page.kind);
  if (page.afterTag !== undefined) q.where("p.tag", ">", page.afterTag);
  const rows: Array<{
    id: string;
    tag: string;
    kind: string;
    active: boolean;
    site_id: string;
    site_code: string;
    circuit_id: string;
    circuit_tag: string;
    unit_tag: string;
  }> = await q;
  const more = rows.length > page.limit;
  const items = rows.slice(0, page.limit).map((r) => ({
    id: r.id,
    tag: r.tag,
    kind: r.kind,
    active: r.active,
    site: { id: r.site_id, code: r.site_code },
    circuit: { id: r.circuit_id, tag: r.circuit_tag },
    unitTag: r.unit_tag,
  }));
  return { items, nextCursor: more ? items[items.length - 1].tag : null };
}
