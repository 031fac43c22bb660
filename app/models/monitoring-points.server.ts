import { z } from "zod";
import { MOUNTINGS } from "../services/coupon-fit";
import type { Db } from "../services/db.server";
import { checkbox, idField, optionalText, tagField, wholeNumber, type FormInput } from "../services/form-fields";
import { isUuid } from "../services/ids";
import { Invalid, NotFoundInTenant, fieldErrorsOf, type FieldErrors } from "../services/outcome";
import { requireOwnSite } from "./sites.server";
import { auditedWrite, changedKeys, listAudit, type Actor, type AuditRow } from "./audit.server";

/** Monitoring points (coupon positions) on a site's circuits. Tags are unique per owner. */

export { MOUNTINGS };
export const DEFAULT_PLANNED_EXPOSURE_DAYS = 90;

export const pointSchema = z.object({
  circuit_id: idField("Choose the circuit this point is on."),
  tag: tagField("the point tag"),
  access_fitting: optionalText("the access fitting", 120),
  orientation: optionalText("the orientation", 120),
  mounting: z.enum(MOUNTINGS, { error: "Choose flush or intrusive mounting." }),
  planned_exposure_days: wholeNumber("the planned exposure", "days", 7, 730, DEFAULT_PLANNED_EXPOSURE_DAYS),
  active: checkbox(true),
});

export type PointRow = {
  id: string;
  tag: string;
  circuit_id: string;
  circuit_tag: string;
  unit_tag: string;
  access_fitting: string;
  orientation: string;
  mounting: "flush" | "intrusive";
  planned_exposure_days: number;
  active: boolean;
  /** The coupon in service at the point now, if any. */
  coupon_serial: string | null;
  installed_at: Date | null;
};

const pointSelect = `
  select p.id, p.tag, p.circuit_id, c.tag as circuit_tag, u.tag as unit_tag, p.access_fitting, p.orientation,
         p.mounting, p.planned_exposure_days, p.active, cur.serial as coupon_serial, cur.installed_at
    from monitoring_points p
    join circuits c on c.id = p.circuit_id
    join process_units u on u.id = c.unit_id
    left join lateral (
      select k.serial, e.installed_at from coupon_exposures e join coupons k on k.id = e.coupon_id
       where e.point_id = p.id and e.owner_id = p.owner_id and e.removed_at is null
       order by e.installed_at desc limit 1
    ) cur on true`;

export async function listPoints(conn: Db, ownerId: string, siteId: string): Promise<PointRow[]> {
  if (!isUuid(siteId)) return [];
  const result = await conn.raw<{ rows: PointRow[] }>(
    `${pointSelect} where p.owner_id = ? and p.site_id = ? order by p.tag`,
    [ownerId, siteId],
  );
  return result.rows;
}

export type PointDetail = PointRow & {
  site_id: string;
  site_name: string;
  site_code: string;
  site_time_zone: string;
  material_code: string;
  created_at: Date;
  updated_at: Date;
};

/** One monitoring point of this owner, or undefined. */
export async function getPoint(conn: Db, ownerId: string, pointId: string): Promise<PointDetail | undefined> {
  if (!isUuid(pointId)) return undefined;
  const result = await conn.raw<{ rows: PointDetail[] }>(
    `select q.*, s.id as site_id, s.name as site_name, s.code as site_code, s.time_zone as site_time_zone,
            c.material_code, p.created_at, p.updated_at
       from (${pointSelect} where p.owner_id = ? and p.id = ?) q
       join monitoring_points p on p.id = q.id
       join circuits c on c.id = p.circuit_id
       join sites s on s.id = p.site_id
      where s.owner_id = ?`,
    [ownerId, pointId, ownerId],
  );
  return result.rows[0];
}

/** The point's own audit trail, newest first. */
export async function pointAudit(conn: Db, ownerId: string, pointId: string): Promise<AuditRow[]> {
  return listAudit(conn, ownerId, { recordType: "monitoring_point", recordId: pointId, limit: 200 });
}

async function pointTagConflict(conn: Db, ownerId: string, tag: string): Promise<FieldErrors> {
  const other = await conn("monitoring_points as p")
    .join("sites as s", "s.id", "p.site_id")
    .where({ "p.owner_id": ownerId, "p.tag": tag })
    .first("s.name", "s.code");
  const where = other ? ` at ${other.name} (${other.code})` : "";
  return {
    tag: `The tag ${tag} is already used by a monitoring point${where}; point tags are unique across all your sites.`,
  };
}

/**
 * Field errors of a point form that failed validation, plus a tag clash if there is
 * one: point tags are unique across all sites, which people do not expect, so say it
 * at once rather than after the other fields are fixed.
 */
async function pointFormErrors(conn: Db, ownerId: string, error: z.ZodError, input: FormInput, exceptId?: string) {
  const errors = fieldErrorsOf(error);
  const tag = typeof input.tag === "string" ? input.tag.trim() : "";
  if (!errors.tag && tag) {
    const q = conn("monitoring_points").where({ owner_id: ownerId, tag });
    if (exceptId) q.whereNot({ id: exceptId });
    if (await q.first("id")) Object.assign(errors, await pointTagConflict(conn, ownerId, tag));
  }
  return errors;
}

/** The circuit, if it is one of this owner's at this site. */
async function circuitAtSite(trx: Db, ownerId: string, siteId: string, circuitId: string) {
  return trx("circuits as c")
    .join("sites as s", "s.id", "c.site_id")
    .where({ "c.id": circuitId, "c.site_id": siteId, "s.owner_id": ownerId })
    .first("c.id", "c.tag");
}

type PointValues = z.output<typeof pointSchema>;
type PointSnapshot = Omit<PointValues, never>;
const pointSnapshot = (p: PointSnapshot): PointSnapshot => ({
  circuit_id: p.circuit_id,
  tag: p.tag,
  access_fitting: p.access_fitting,
  orientation: p.orientation,
  mounting: p.mounting,
  planned_exposure_days: p.planned_exposure_days,
  active: p.active,
});

/** Parses a point form; a tag clash is reported with the other field errors. */
async function parsePoint(conn: Db, ownerId: string, input: FormInput, exceptId?: string): Promise<PointValues> {
  const parsed = pointSchema.safeParse(input);
  if (!parsed.success) throw new Invalid(await pointFormErrors(conn, ownerId, parsed.error, input, exceptId));
  return parsed.data;
}

export async function createPoint(
  conn: Db,
  ownerId: string,
  actor: Actor,
  siteId: string,
  input: FormInput,
  requestId?: string | null,
): Promise<{ id: string; tag: string }> {
  if (!isUuid(siteId)) throw new NotFoundInTenant("site");
  const v = await parsePoint(conn, ownerId, input);
  return auditedWrite(
    conn,
    { ownerId, actor, requestId },
    async ({ trx, record }) => {
      await requireOwnSite(trx, ownerId, siteId);
      if (!(await circuitAtSite(trx, ownerId, siteId, v.circuit_id)))
        throw new Invalid({ circuit_id: "Choose one of this site’s circuits." });
      const [point]: Array<{ id: string; tag: string }> = await trx("monitoring_points")
        .insert({ owner_id: ownerId, site_id: siteId, kind: "coupon", ...pointSnapshot(v) })
        .returning(["id", "tag"]);
      await record({
        action: "monitoring_point.created",
        recordType: "monitoring_point",
        recordId: point.id,
        after: { site_id: siteId, ...pointSnapshot(v) },
      });
      return { id: point.id, tag: point.tag };
    },
    { monitoring_points_owner_tag_key: () => pointTagConflict(conn, ownerId, v.tag) },
  );
}

export async function updatePoint(
  conn: Db,
  ownerId: string,
  actor: Actor,
  pointId: string,
  input: FormInput,
  requestId?: string | null,
): Promise<{ id: string; changed: boolean }> {
  if (!isUuid(pointId)) throw new NotFoundInTenant("monitoring point");
  const v = await parsePoint(conn, ownerId, input, pointId);
  return auditedWrite(
    conn,
    { ownerId, actor, requestId },
    async ({ trx, record }) => {
      const before: (PointSnapshot & { id: string; site_id: string }) | undefined = await trx("monitoring_points")
        .where({ id: pointId, owner_id: ownerId })
        .forUpdate()
        .first(
          "id",
          "site_id",
          "circuit_id",
          "tag",
          "access_fitting",
          "orientation",
          "mounting",
          "planned_exposure_days",
          "active",
        );
      if (!before) throw new NotFoundInTenant("monitoring point");
      if (!(await circuitAtSite(trx, ownerId, before.site_id, v.circuit_id)))
        throw new Invalid({ circuit_id: "Choose one of this site’s circuits; a point cannot move to another site." });
      const after = pointSnapshot(v);
      const previous = pointSnapshot(before);
      if (changedKeys(previous, after).length === 0) return { id: pointId, changed: false };
      await trx("monitoring_points")
        .where({ id: pointId, owner_id: ownerId })
        .update({ ...after, updated_at: trx.fn.now() });
      await record({
        action: "monitoring_point.updated",
        recordType: "monitoring_point",
        recordId: pointId,
        before: previous,
        after,
      });
      return { id: pointId, changed: true };
    },
    { monitoring_points_owner_tag_key: () => pointTagConflict(conn, ownerId, v.tag) },
  );
}
