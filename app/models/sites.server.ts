import type { Knex } from "knex";
import type { SessionUser } from "../context";
import type { Db } from "../services/db.server";
import type { ScopeOfWork } from "../services/permissions";

export type SiteRow = {
  id: string;
  owner_id: string;
  owner_name: string;
  name: string;
  code: string;
  time_zone: string;
  /** For contractors: the work their active contracts allow at this site. */
  scope: ScopeOfWork[];
};

/**
 * A contract (aliased `c`) in force today: started, not ended (ends_on is the last day
 * covered). The one definition of "active" every tenant query uses, in SQL text so raw
 * queries can share it.
 */
export const ACTIVE_CONTRACT_SQL = "c.starts_on <= current_date and (c.ends_on is null or c.ends_on >= current_date)";

/** A contractor's contracts in force today (alias `c`). */
export function activeContracts(conn: Db, contractorId: string): Knex.QueryBuilder {
  return conn("contracts as c").where("c.contractor_id", contractorId).whereRaw(ACTIVE_CONTRACT_SQL);
}

/**
 * Ids of the sites (column `site_id`) where a contractor's active contracts cover the
 * given scope of work, or any scope when none is given: a subquery for tenant filters.
 */
export function coveredSiteIds(conn: Db, contractorId: string, scope?: ScopeOfWork): Knex.QueryBuilder {
  const q = activeContracts(conn, contractorId).join("contract_sites as cs", "cs.contract_id", "c.id").distinct("cs.site_id");
  if (scope) q.whereRaw("? = any(c.scope)", [scope]);
  return q;
}

/**
 * The sites a user may see: all of the owner's for owner staff; for a contractor, the
 * sites an active contract covers, with the union of those contracts' scopes.
 */
export async function accessibleSites(conn: Db, user: SessionUser): Promise<SiteRow[]> {
  if (user.organisation.kind === "owner") {
    const rows = await conn("sites as s")
      .join("organisations as o", "o.id", "s.owner_id")
      .where("s.owner_id", user.organisation.id)
      .orderBy("s.name")
      .select("s.id", "s.owner_id", "o.name as owner_name", "s.name", "s.code", "s.time_zone");
    return rows.map((r) => ({ ...r, scope: ["coupon_monitoring", "thickness_inspection"] as ScopeOfWork[] }));
  }
  const result = await conn.raw(
    `select s.id, s.owner_id, o.name as owner_name, s.name, s.code, s.time_zone,
            array_agg(distinct sc order by sc) as scope
       from sites s
       join organisations o on o.id = s.owner_id
       join contract_sites cs on cs.site_id = s.id
       join contracts c on c.id = cs.contract_id
       cross join lateral unnest(c.scope) as sc
      where c.contractor_id = ?
        and ${ACTIVE_CONTRACT_SQL}
      group by s.id, o.name
      order by s.name`,
    [user.organisation.id],
  );
  return result.rows as SiteRow[];
}

/** The scope of work a contractor may record at one site today (empty: none). */
export async function contractorScopeAt(conn: Db, contractorId: string, siteId: string): Promise<ScopeOfWork[]> {
  const rows = await activeContracts(conn, contractorId)
    .join("contract_sites as cs", "cs.contract_id", "c.id")
    .where("cs.site_id", siteId)
    .select(conn.raw("unnest(c.scope) as scope"));
  return [...new Set(rows.map((r: { scope: ScopeOfWork }) => r.scope))].sort() as ScopeOfWork[];
}

export async function getOwnerSite(conn: Db, ownerId: string, siteId: string) {
  return conn("sites").where({ id: siteId, owner_id: ownerId }).first("id", "owner_id", "name", "code", "time_zone");
}
