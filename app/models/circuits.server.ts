import { z } from "zod";
import { MATERIALS } from "../domain/index.ts";
import type { Db } from "../services/db.server";
import { idField, optionalText, tagField, type FormInput } from "../services/form-fields";
import { isUuid } from "../services/ids";
import { Invalid, NotFoundInTenant, parseOrThrow, type FieldErrors } from "../services/outcome";
import { requireOwnSite } from "./sites.server";
import { auditedWrite, changedKeys, type Actor } from "./audit.server";

/** Circuits (runs of piping in one service and material) of a site's process units. */

const materialKeys = MATERIALS.map((m) => m.key) as [string, ...string[]];

export const circuitSchema = z.object({
  unit_id: idField("Choose the process unit this circuit belongs to."),
  tag: tagField("the circuit tag"),
  description: optionalText("the description", 300),
  material: z.enum(materialKeys, { error: "Choose the circuit’s material from the list." }),
  service: optionalText("the service", 200),
});

export type CircuitRow = {
  id: string;
  unit_id: string;
  unit_tag: string;
  tag: string;
  description: string;
  material_code: string;
  service: string;
  points: number;
};

export async function listCircuits(conn: Db, ownerId: string, siteId: string): Promise<CircuitRow[]> {
  if (!isUuid(siteId)) return [];
  const result = await conn.raw<{ rows: CircuitRow[] }>(
    `select c.id, c.unit_id, u.tag as unit_tag, c.tag, c.description, c.material_code, c.service,
            (select count(*) from monitoring_points p where p.circuit_id = c.id)::int as points
       from circuits c
       join process_units u on u.id = c.unit_id
       join sites s on s.id = c.site_id
      where s.owner_id = ? and c.site_id = ?
      order by u.tag, c.tag`,
    [ownerId, siteId],
  );
  return result.rows;
}

const circuitClashes = (tag: string): Record<string, FieldErrors> => ({
  circuits_site_tag_key: {
    tag: `This site already has a circuit tagged ${tag}; circuit tags are unique within a site.`,
  },
});

/** The unit, if it is one of this owner's at this site. */
async function unitAtSite(trx: Db, ownerId: string, siteId: string, unitId: string) {
  return trx("process_units as u")
    .join("sites as s", "s.id", "u.site_id")
    .where({ "u.id": unitId, "u.site_id": siteId, "s.owner_id": ownerId })
    .first("u.id", "u.tag");
}

type CircuitSnapshot = { unit_id: string; tag: string; description: string; material_code: string; service: string };
const circuitSnapshot = (c: CircuitSnapshot): CircuitSnapshot => ({
  unit_id: c.unit_id,
  tag: c.tag,
  description: c.description,
  material_code: c.material_code,
  service: c.service,
});
const fromForm = (v: z.output<typeof circuitSchema>): CircuitSnapshot => ({
  unit_id: v.unit_id,
  tag: v.tag,
  description: v.description,
  material_code: v.material,
  service: v.service,
});
const notThisSitesUnit = () => new Invalid({ unit_id: "Choose one of this site’s process units." });

export async function createCircuit(
  conn: Db,
  ownerId: string,
  actor: Actor,
  siteId: string,
  input: FormInput,
  requestId?: string | null,
): Promise<{ id: string }> {
  if (!isUuid(siteId)) throw new NotFoundInTenant("site");
  const v = parseOrThrow(circuitSchema, input);
  return auditedWrite(
    conn,
    { ownerId, actor, requestId },
    async ({ trx, record }) => {
      await requireOwnSite(trx, ownerId, siteId);
      if (!(await unitAtSite(trx, ownerId, siteId, v.unit_id))) throw notThisSitesUnit();
      const row = fromForm(v);
      const [circuit]: Array<{ id: string }> = await trx("circuits")
        .insert({ ...row, site_id: siteId })
        .returning(["id"]);
      await record({
        action: "circuit.created",
        recordType: "circuit",
        recordId: circuit.id,
        after: { site_id: siteId, ...row },
      });
      return { id: circuit.id };
    },
    circuitClashes(v.tag),
  );
}

export async function updateCircuit(
  conn: Db,
  ownerId: string,
  actor: Actor,
  circuitId: string,
  input: FormInput,
  requestId?: string | null,
): Promise<{ id: string; siteId: string; changed: boolean }> {
  if (!isUuid(circuitId)) throw new NotFoundInTenant("circuit");
  const v = parseOrThrow(circuitSchema, input);
  return auditedWrite(
    conn,
    { ownerId, actor, requestId },
    async ({ trx, record }) => {
      const before: (CircuitSnapshot & { id: string; site_id: string }) | undefined = await trx("circuits as c")
        .join("sites as s", "s.id", "c.site_id")
        .where({ "c.id": circuitId, "s.owner_id": ownerId })
        .forUpdate("c")
        .first("c.id", "c.site_id", "c.unit_id", "c.tag", "c.description", "c.material_code", "c.service");
      if (!before) throw new NotFoundInTenant("circuit");
      const siteId = before.site_id;
      if (!(await unitAtSite(trx, ownerId, siteId, v.unit_id))) throw notThisSitesUnit();
      const after = fromForm(v);
      const previous = circuitSnapshot(before);
      if (changedKeys(previous, after).length === 0) return { id: circuitId, siteId, changed: false };
      await trx("circuits")
        .where({ id: circuitId })
        .update({ ...after, updated_at: trx.fn.now() });
      await record({ action: "circuit.updated", recordType: "circuit", recordId: circuitId, before: previous, after });
      return { id: circuitId, siteId, changed: true };
    },
    circuitClashes(v.tag),
  );
}
