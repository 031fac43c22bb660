import { z } from "zod";
import type { Db } from "../services/db.server";
import { optionalText, tagField, type FormInput } from "../services/form-fields";
import { isUuid } from "../services/ids";
import { NotFoundInTenant, parseOrThrow, type FieldErrors } from "../services/outcome";
import { requireOwnSite } from "./sites.server";
import { auditedWrite, type Actor } from "./audit.server";

/** Process units of a site: tenant-scoped reads and audited writes. */

export const unitSchema = z.object({
  tag: tagField("the unit tag"),
  description: optionalText("the description", 300),
});

export type UnitRow = { id: string; tag: string; description: string; circuits: number; points: number };

export async function listUnits(conn: Db, ownerId: string, siteId: string): Promise<UnitRow[]> {
  if (!isUuid(siteId)) return [];
  const result = await conn.raw<{ rows: UnitRow[] }>(
    `select u.id, u.tag, u.description,
            (select count(*) from circuits c where c.unit_id = u.id)::int as circuits,
            (select count(*) from monitoring_points p join circuits c on c.id = p.circuit_id where c.unit_id = u.id)::int as points
       from process_units u
       join sites s on s.id = u.site_id
      where s.owner_id = ? and u.site_id = ?
      order by u.tag`,
    [ownerId, siteId],
  );
  return result.rows;
}

type UnitRecord = { id: string; site_id: string; tag: string; description: string };

const unitClashes = (tag: string): Record<string, FieldErrors> => ({
  process_units_site_tag_key: {
    tag: `This site already has a unit tagged ${tag}; unit tags are unique within a site.`,
  },
});

export async function createUnit(
  conn: Db,
  ownerId: string,
  actor: Actor,
  siteId: string,
  input: FormInput,
  requestId?: string | null,
): Promise<{ id: string }> {
  if (!isUuid(siteId)) throw new NotFoundInTenant("site");
  const v = parseOrThrow(unitSchema, input);
  return auditedWrite(
    conn,
    { ownerId, actor, requestId },
    async ({ trx, record }) => {
      await requireOwnSite(trx, ownerId, siteId);
      const [unit]: UnitRecord[] = await trx("process_units")
        .insert({ site_id: siteId, tag: v.tag, description: v.description })
        .returning(["id", "tag", "description"]);
      await record({
        action: "process_unit.created",
        recordType: "process_unit",
        recordId: unit.id,
        after: { site_id: siteId, tag: unit.tag, description: unit.description },
      });
      return { id: unit.id };
    },
    unitClashes(v.tag),
  );
}

export async function updateUnit(
  conn: Db,
  ownerId: string,
  actor: Actor,
  unitId: string,
  input: FormInput,
  requestId?: string | null,
): Promise<{ id: string; siteId: string; changed: boolean }> {
  if (!isUuid(unitId)) throw new NotFoundInTenant("process unit");
  const v = parseOrThrow(unitSchema, input);
  return auditedWrite(
    conn,
    { ownerId, actor, requestId },
    async ({ trx, record }) => {
      const before: UnitRecord | undefined = await trx("process_units as u")
        .join("sites as s", "s.id", "u.site_id")
        .where({ "u.id": unitId, "s.owner_id": ownerId })
        .forUpdate("u")
        .first("u.id", "u.site_id", "u.tag", "u.description");
      if (!before) throw new NotFoundInTenant("process unit");
      if (before.tag === v.tag && before.description === v.description)
        return { id: unitId, siteId: before.site_id, changed: false };
      await trx("process_units")
        .where({ id: unitId })
        .update({ tag: v.tag, description: v.description, updated_at: trx.fn.now() });
      await record({
        action: "process_unit.updated",
        recordType: "process_unit",
        recordId: unitId,
        before: { tag: before.tag, description: before.description },
        after: { tag: v.tag, description: v.description },
      });
      return { id: unitId, siteId: before.site_id, changed: true };
    },
    unitClashes(v.tag),
  );
}
