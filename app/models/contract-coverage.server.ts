import type { Knex } from "knex";
import type { SessionUser } from "../context";
import type { Db } from "../services/db.server";
import type { ScopeOfWork } from "../services/permissions";

/**
 * Contract coverage: which sites a contractor's contracts in force cover, and for
 * which scope of work. Every tenant query of contractor data goes through these.
 */

/**
 * A contract (aliased `c`) in force today at one of its sites (its `contract_sites` row
 * aliased `cs`): started, not ended (ends_on is the last day covered), both judged by the
 * calendar date at that site in the site's time zone (`site_today`), so a contract
 * starting on the 5th covers an Auckland site from Auckland's midnight, whatever the
 * database server's clock says. The one definition of "active" every tenant query uses,
 * in SQL text so raw queries can share it.
 */
export const ACTIVE_CONTRACT_SQL =
  "c.starts_on <= site_today(cs.site_id) and (c.ends_on is null or c.ends_on >= site_today(cs.site_id))";

/**
 * The same rule on another date: `day` is SQL text for a date (a column, a bound
 * parameter such as ":day::date"), e.g. the site's own date for a job run at a site hour.
 */
export function contractInForceOnSql(day: string): string {
  return `c.starts_on <= ${day} and (c.ends_on is null or c.ends_on >= ${day})`;
}

/** A contractor's contracts in force today, one row per site they cover (aliases `c`, `cs`). */
export function activeContracts(conn: Db, contractorId: string): Knex.QueryBuilder {
  return conn("contracts as c")
    .join("contract_sites as cs", "cs.contract_id", "c.id")
    .where("c.contractor_id", contractorId)
    .whereRaw(ACTIVE_CONTRACT_SQL);
}

/**
 * Ids of the sites (column `site_id`) where a contractor's active contracts cover the
 * given scope of work, or any scope when none is given: a subquery for tenant filters.
 */
export function coveredSiteIds(conn: Db, contractorId: string, scope?: ScopeOfWork): Knex.QueryBuilder {
  const q = activeContracts(conn, contractorId).distinct("cs.site_id");
  if (scope) q.whereRaw("? = any(c.scope)", [scope]);
  return q;
}

/**
 * Sites (with owner) where this user may read coupon work: all of the owner's sites for
 * owner staff; for a contractor, sites an active coupon-monitoring contract covers.
 */
export function couponWorkSiteIds(conn: Db, user: SessionUser): Knex.QueryBuilder {
  if (user.organisation.kind === "owner") return conn("sites").where("owner_id", user.organisation.id).select("id");
  return coveredSiteIds(conn, user.organisation.id, "coupon_monitoring");
}

/** Whether a contractor has any live contract at the site, whatever its scope (for 403 vs 404). */
export async function contractorSeesSite(conn: Db, user: SessionUser, siteId: string): Promise<boolean> {
  return Boolean(await coveredSiteIds(conn, user.organisation.id).where("cs.site_id", siteId).first());
}
