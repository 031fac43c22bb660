import { z } from "zod";
import type { SessionUser } from "../context";
import type { Db } from "../services/db.server";
import { requiredText, type FormInput } from "../services/form-fields";
import { isUuid } from "../services/ids";
import { NotFoundInTenant, parseOrThrow, type FieldErrors } from "../services/outcome";
import type { ScopeOfWork } from "../services/permissions";
import { auditedWrite, type Actor } from "./audit.server";
import { ACTIVE_CONTRACT_SQL } from "./contract-coverage.server";

/**
 * Sites (plants): what a user may see, and the owner's set-up of them. Every query
 * filters by the tenant in SQL; a foreign or malformed id finds nothing.
 */

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
  const result = await conn.raw<{ rows: SiteRow[] }>(
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
  return result.rows;
}

/** IANA names the runtime knows, plus UTC (which Intl lists only under Etc/ names). */
let zones: Map<string, string> | undefined;
function timeZones(): Map<string, string> {
  if (!zones) {
    zones = new Map();
    for (const z of [...Intl.supportedValuesOf("timeZone"), "UTC"]) zones.set(z.toLowerCase(), z);
  }
  return zones;
}
/** The canonical spelling of an IANA time zone name, or undefined when it is not one. */
export function canonicalTimeZone(name: string): string | undefined {
  return timeZones().get(name.trim().toLowerCase());
}
export function timeZoneNames(): string[] {
  return [...new Set(timeZones().values())].sort();
}

export const siteSchema = z.object({
  name: requiredText("the site’s name", 120),
  code: z
    .string({ error: "Enter a short site code." })
    .trim()
    .toUpperCase()
    .min(1, "Enter a short site code, e.g. BWR.")
    .regex(
      /^[A-Z0-9][A-Z0-9_-]{0,15}$/,
      "Use up to 16 capital letters, digits, hyphens or underscores, starting with a letter or digit (e.g. BWR or NORTH-1).",
    ),
  time_zone: z
    .string({ error: "Enter the site’s time zone." })
    .trim()
    .min(1, "Enter the site’s time zone, e.g. Europe/London or America/Chicago.")
    .transform((v, ctx) => {
      const zone = canonicalTimeZone(v);
      if (!zone) {
        ctx.addIssue({
          code: "custom",
          message: `'${v}' is not an IANA time zone name; use the Region/City form, e.g. Europe/London, America/Chicago or UTC.`,
        });
        return z.NEVER;
      }
      return zone;
    }),
});

export type SetupSiteRow = {
  id: string;
  name: string;
  code: string;
  time_zone: string;
  units: number;
  circuits: number;
  points: number;
  active_points: number;
  coupons_in_service: number;
};

/** The owner's sites with what is set up under each. */
export async function listSetupSites(conn: Db, ownerId: string): Promise<SetupSiteRow[]> {
  const result = await conn.raw<{ rows: SetupSiteRow[] }>(
    `select s.id, s.name, s.code, s.time_zone,
            (select count(*) from process_units u where u.site_id = s.id)::int as units,
            (select count(*) from circuits c where c.site_id = s.id)::int as circuits,
            (select count(*) from monitoring_points p where p.site_id = s.id and p.owner_id = s.owner_id)::int as points,
            (select count(*) from monitoring_points p where p.site_id = s.id and p.owner_id = s.owner_id and p.active)::int as active_points,
            (select count(*) from coupon_exposures e join monitoring_points p on p.id = e.point_id
              where p.site_id = s.id and e.owner_id = s.owner_id and e.removed_at is null)::int as coupons_in_service
       from sites s
      where s.owner_id = ?
      order by s.name, s.code`,
    [ownerId],
  );
  return result.rows;
}

export type SetupSite = { id: string; name: string; code: string; time_zone: string };

/** One of the owner's sites, or undefined (malformed id, another owner's site). */
export async function getSetupSite(conn: Db, ownerId: string, siteId: string): Promise<SetupSite | undefined> {
  if (!isUuid(siteId)) return undefined;
  return conn("sites").where({ id: siteId, owner_id: ownerId }).first("id", "name", "code", "time_zone");
}

/** Inside a write: the site must be this owner's (a foreign or malformed id is not found). */
export async function requireOwnSite(trx: Db, ownerId: string, siteId: string): Promise<void> {
  if (!isUuid(siteId) || !(await trx("sites").where({ id: siteId, owner_id: ownerId }).first("id")))
    throw new NotFoundInTenant("site");
}

const siteSnapshot = (s: SetupSite) => ({ name: s.name, code: s.code, time_zone: s.time_zone });

const siteClashes = (code: string): Record<string, FieldErrors> => ({
  sites_owner_code_key: { code: `Another of your sites already uses the code ${code}; choose a different one.` },
});

export async function createSite(
  conn: Db,
  ownerId: string,
  actor: Actor,
  input: FormInput,
  requestId?: string | null,
): Promise<{ id: string; code: string }> {
  const v = parseOrThrow(siteSchema, input);
  return auditedWrite(
    conn,
    { ownerId, actor, requestId },
    async ({ trx, record }) => {
      const [site]: SetupSite[] = await trx("sites")
        .insert({ owner_id: ownerId, name: v.name, code: v.code, time_zone: v.time_zone })
        .returning(["id", "name", "code", "time_zone"]);
      await record({ action: "site.created", recordType: "site", recordId: site.id, after: siteSnapshot(site) });
      return { id: site.id, code: site.code };
    },
    siteClashes(v.code),
  );
}

export async function updateSite(
  conn: Db,
  ownerId: string,
  actor: Actor,
  siteId: string,
  input: FormInput,
  requestId?: string | null,
): Promise<{ id: string; changed: boolean }> {
  if (!isUuid(siteId)) throw new NotFoundInTenant("site");
  const v = parseOrThrow(siteSchema, input);
  return auditedWrite(
    conn,
    { ownerId, actor, requestId },
    async ({ trx, record }) => {
      const before: SetupSite | undefined = await trx("sites")
        .where({ id: siteId, owner_id: ownerId })
        .forUpdate()
        .first("id", "name", "code", "time_zone");
      if (!before) throw new NotFoundInTenant("site");
      const after = siteSnapshot({ id: siteId, ...v });
      if (JSON.stringify(siteSnapshot(before)) === JSON.stringify(after)) return { id: siteId, changed: false };
      await trx("sites")
        .where({ id: siteId, owner_id: ownerId })
        .update({ ...after, updated_at: trx.fn.now() });
      await record({
        action: "site.updated",
        recordType: "site",
        recordId: siteId,
        before: siteSnapshot(before),
        after,
      });
      return { id: siteId, changed: true };
    },
    siteClashes(v.code),
  );
}

/** Reads of an owner's sites for pickers and filters. */

type SiteNameRow = { id: string; owner_id: string; name: string; code: string };

export type SiteChoice = Pick<SiteNameRow, "id" | "name">;

/** The owner's own sites by name. */
export async function ownerSiteChoices(conn: Db, ownerId: string): Promise<SiteChoice[]> {
  return conn<SiteNameRow>("sites").where({ owner_id: ownerId }).orderBy("name").select("id", "name");
}
