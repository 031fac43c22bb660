import { z } from "zod";
import {
  MATERIALS,
  STANDARD_NPS,
  STAINLESS_SCHEDULES,
  circuitRequiredThickness,
  nominalWallOf,
  normaliseSchedule,
  outsideDiameterOf,
  structuralMinimumThickness,
  yCoefficient,
} from "../domain/index.ts";
import type { Db } from "../services/db.server";
import { blank, idField, optionalDecimal, optionalText, tagField, type FormInput } from "../services/form-fields";
import { isUuid } from "../services/ids";
import { Invalid, NotFoundInTenant, fieldErrorsOf, type FieldErrors } from "../services/outcome";
import type { RequiredThicknessView, TableSourceView } from "../services/circuit-views";
import { requireOwnSite } from "./sites.server";
import { auditedWrite, changedKeys, type Actor } from "./audit.server";
import { queueLifeRecompute } from "./circuit-life.server";

/** Circuits (runs of piping in one service and material) of a site's process units. */

const materialKeys = MATERIALS.map((m) => m.key) as [string, ...string[]];

/**
 * A nominal pipe size as engineers write it: "6", "0.75", "3/4", "2-1/2" or "2 1/2".
 * Returns the size as a number, or a sentence saying what is wrong.
 */
export function readNps(raw: string): { value: number } | { problem: string } {
  const text = raw.trim();
  let m: RegExpMatchArray | null;
  let value: number | undefined;
  if ((m = text.match(/^(\d+)[- ](\d+)\/(\d+)$/))) value = Number(m[1]) + Number(m[2]) / Number(m[3]);
  else if ((m = text.match(/^(\d+)\/(\d+)$/))) value = Number(m[1]) / Number(m[2]);
  else if (/^(\d+(\.\d+)?|\.\d+)$/.test(text)) value = Number(text);
  if (value === undefined || !Number.isFinite(value))
    return { problem: `Write the NPS as a size such as 6, 3/4 or 2-1/2; '${text.slice(0, 20)}' is not one.` };
  if (!(value > 0) || value > 80) return { problem: "The NPS must be more than 0 and at most 80." };
  return { value };
}

const npsField = z
  .unknown()
  .optional()
  .transform((raw, ctx): string => {
    if (blank(raw)) return "";
    if (typeof raw !== "string") {
      ctx.addIssue({ code: "custom", message: "Write the NPS as a size such as 6, 3/4 or 2-1/2." });
      return z.NEVER;
    }
    const read = readNps(raw);
    if ("problem" in read) {
      ctx.addIssue({ code: "custom", message: read.problem });
      return z.NEVER;
    }
    return raw.trim();
  });

const pipingClassField = z
  .unknown()
  .optional()
  .transform((raw, ctx): number | null => {
    if (blank(raw)) return null;
    if (raw === "1" || raw === "2" || raw === "3" || raw === "4") return Number(raw);
    ctx.addIssue({ code: "custom", message: "Choose the piping class 1, 2, 3 or 4, or leave it empty." });
    return z.NEVER;
  });

/** The design data fields, SI, named as their columns. */
export const designSchema = z.object({
  nps: npsField,
  schedule: optionalText("the schedule", 20),
  outside_diameter_mm: optionalDecimal({ what: "the outside diameter", unit: "mm", gt: 0, max: 5000, decimals: 3 }),
  nominal_wall_mm: optionalDecimal({ what: "the nominal wall", unit: "mm", gt: 0, max: 500, decimals: 3 }),
  mill_tolerance_pct: optionalDecimal({ what: "the mill under-tolerance", unit: "%", min: 0, max: 99.99, decimals: 2 }),
  design_pressure_mpa: optionalDecimal({ what: "the design pressure", unit: "MPa", gt: 0, max: 1000, decimals: 4 }),
  design_temperature_c: optionalDecimal({
    what: "the design temperature",
    unit: "°C",
    min: -273.15,
    max: 1000,
    decimals: 2,
  }),
  allowable_stress_mpa: optionalDecimal({ what: "the allowable stress S", unit: "MPa", gt: 0, max: 2000, decimals: 2 }),
  joint_factor_e: optionalDecimal({ what: "the joint quality factor E", unit: "", gt: 0, max: 1, decimals: 4 }),
  weld_factor_w: optionalDecimal({
    what: "the weld strength reduction factor W",
    unit: "",
    gt: 0,
    max: 1,
    decimals: 4,
  }),
  y_coefficient: optionalDecimal({
    what: "the coefficient Y",
    unit: "",
    min: 0,
    max: 0.9999,
    decimals: 4,
    decimalsWhy: "Y is below 1",
  }),
  corrosion_allowance_mm: optionalDecimal({
    what: "the corrosion allowance",
    unit: "mm",
    min: 0,
    max: 100,
    decimals: 3,
  }),
  structural_minimum_mm: optionalDecimal({
    what: "the structural minimum",
    unit: "mm",
    gt: 0,
    max: 500,
    decimals: 3,
  }),
  structural_minimum_reason: optionalText("the reason for the structural minimum", 300),
  piping_class: pipingClassField,
});

export const circuitSchema = z
  .object({
    unit_id: idField("Choose the process unit this circuit belongs to."),
    tag: tagField("the circuit tag"),
    description: optionalText("the description", 300),
    material: z.enum(materialKeys, { error: "Choose the circuit’s material from the list." }),
    service: optionalText("the service", 200),
  })
  .extend(designSchema.shape);

/** Fields whose presence means the circuit has pressure design data. */
const PRESSURE_FIELDS = [
  "design_pressure_mpa",
  "outside_diameter_mm",
  "allowable_stress_mpa",
  "joint_factor_e",
  "design_temperature_c",
  "y_coefficient",
] as const;

/**
 * Every field's own rule, then the rules between fields, all errors at once: once any
 * pressure design field is given, B31.3 eq. 3a needs P, D, S and E, and the design
 * temperature unless Y is given; a structural minimum needs its reason.
 */
export function parseCircuit(input: FormInput): z.output<typeof circuitSchema> {
  const parsed = circuitSchema.safeParse(input);
  const errors: FieldErrors = parsed.success ? {} : fieldErrorsOf(parsed.error);
  const given = (name: string) => !blank(input[name]);
  const need = (name: string, message: string) => {
    if (!given(name) && !errors[name]) errors[name] = message;
  };
  const tableOd = given("outside_diameter_mm") ? undefined : tableDimensionsOf(input).outsideDiameterMm;
  if (PRESSURE_FIELDS.some((name) => given(name))) {
    need("design_pressure_mpa", "Enter the design pressure in MPa (gauge): the pressure design thickness needs it.");
    if (tableOd === undefined)
      need(
        "outside_diameter_mm",
        "Enter the outside diameter in mm (or an NPS from ⅛ to 24, which gives it): the pressure design thickness needs it.",
      );
    need("allowable_stress_mpa", "Enter the allowable stress S in MPa at the design temperature.");
    need("joint_factor_e", "Enter the joint quality factor E (1 for seamless pipe).");
    if (!given("y_coefficient"))
      need("design_temperature_c", "Enter the design temperature in °C, or the coefficient Y: Y is read from it.");
  }
  if (given("structural_minimum_mm"))
    need("structural_minimum_reason", "Say why this structural minimum is used instead of the API 574 table.");
  else if (given("structural_minimum_reason") && !errors.structural_minimum_reason)
    errors.structural_minimum_mm = "Enter the structural minimum in mm that this reason is for, or clear the reason.";
  if (Object.keys(errors).length > 0 || !parsed.success) throw new Invalid(errors);
  return parsed.data;
}

/**
 * The outside diameter by NPS and the nominal wall by NPS and schedule from the pipe tables
 * (ASME B36.10M / B36.19M), for what the form left blank; undefined where the table has none.
 */
function tableDimensionsOf(input: FormInput): { outsideDiameterMm?: number; nominalWallMm?: number } {
  const npsText = typeof input.nps === "string" ? input.nps : "";
  if (npsText.trim() === "") return {};
  const nps = readNps(npsText);
  if ("problem" in nps) return {};
  const schedule = typeof input.schedule === "string" ? input.schedule : "";
  return {
    outsideDiameterMm: outsideDiameterOf(nps.value),
    nominalWallMm: schedule.trim() === "" ? undefined : nominalWallOf(nps.value, schedule),
  };
}

/** "from NPS 6 Sch 40 (ASME B36.10M)": where a table value came from, in words. */
export function tableSourceWords(nps: string | null, schedule: string | null, what: "od" | "wall"): string {
  const s = schedule === null ? undefined : normaliseSchedule(schedule);
  const stainless = s !== undefined && STAINLESS_SCHEDULES.includes(s);
  const standard = what === "wall" && stainless ? "ASME B36.19M" : "ASME B36.10M";
  const sch = what === "wall" && s !== undefined ? (/^\d+$/.test(s) ? ` Sch ${s}` : ` ${s}`) : "";
  return `from NPS ${nps ?? ""}${sch} (${standard})`;
}

type StoredCircuitRow = {
  id: string;
  unit_id: string;
  unit_tag: string;
  tag: string;
  description: string;
  material_code: string;
  service: string;
  points: number;
} & StoredDesign;

export type CircuitRow = Omit<StoredCircuitRow, DesignNumber> &
  CircuitDesign & {
    requiredThickness: RequiredThicknessView;
    /** Where the outside diameter and nominal wall came from, when from the pipe tables. */
    tableSource: TableSourceView;
  };

export type { RequiredThicknessView, TableSourceView };

/**
 * The required thickness of a circuit from its stored design data (API 570: the greater of
 * B31.3 eq. 3a and the structural minimum), or in words what is missing.
 */
export function requiredThicknessOf(c: CircuitDesign & { material_code: string }): RequiredThicknessView {
  const missing: string[] = [];
  if (c.design_pressure_mpa === null) missing.push("design pressure");
  if (c.outside_diameter_mm === null) missing.push("outside diameter");
  if (c.allowable_stress_mpa === null) missing.push("allowable stress S");
  if (c.joint_factor_e === null) missing.push("joint quality factor E");
  if (c.y_coefficient === null && c.design_temperature_c === null) missing.push("design temperature (or Y)");
  const nps = c.nps === null ? null : readNps(c.nps);
  const npsValue = nps && "value" in nps ? nps.value : null;
  if (c.structural_minimum_mm === null && npsValue === null) missing.push("NPS (or a structural minimum)");
  if (missing.length > 0) return { status: "missing", missing };
  if (c.structural_minimum_mm === null && npsValue !== null && !STANDARD_NPS.includes(npsValue))
    return {
      status: "not-applicable",
      message: `NPS ${c.nps} is not in the API 574 structural minimum table (NPS ½ to 24): enter a structural minimum with its reason.`,
    };
  const material = MATERIALS.find((m) => m.key === c.material_code);
  let y = c.y_coefficient;
  const yFromTable = y === null;
  try {
    if (y === null) {
      if (!material) return { status: "not-applicable", message: "The circuit’s material is unknown: enter Y." };
      y = yCoefficient({
        materialGroup: material.yMaterialGroup,
        designTemperatureC: c.design_temperature_c as number,
      });
    }
    const r = circuitRequiredThickness({
      pressureMPa: c.design_pressure_mpa as number,
      outsideDiameterMm: c.outside_diameter_mm as number,
      allowableStressMPa: c.allowable_stress_mpa as number,
      jointEfficiency: c.joint_factor_e as number,
      weldStrengthFactor: c.weld_factor_w ?? 1,
      yCoefficient: y,
      ...(c.structural_minimum_mm !== null
        ? { structuralMinimumMm: c.structural_minimum_mm }
        : { nps: npsValue as number }),
    });
    const owner = c.structural_minimum_mm !== null;
    return {
      status: "ok",
      requiredMm: r.requiredMm,
      pressureDesignMm: r.pressureDesignMm,
      structuralMinimumMm: owner ? r.structuralMinimumMm : structuralMinimumThickness(npsValue as number),
      governedBy:
        r.governedBy === "pressure-design" ? "pressure-design" : owner ? "owner-minimum" : "structural-minimum",
      ownerReason: owner ? c.structural_minimum_reason : null,
      nps: npsValue,
      y,
      yFromTable,
      corrosionAllowanceMm: c.corrosion_allowance_mm,
    };
  } catch (error) {
    return { status: "not-applicable", message: error instanceof Error ? error.message : String(error) };
  }
}

export async function listCircuits(conn: Db, ownerId: string, siteId: string): Promise<CircuitRow[]> {
  if (!isUuid(siteId)) return [];
  const result = await conn.raw<{ rows: StoredCircuitRow[] }>(
    `select c.id, c.unit_id, u.tag as unit_tag, c.tag, c.description, c.material_code, c.service,
            ${DESIGN_COLUMNS.map((k) => `c.${k}`).join(", ")},
            (select count(*) from monitoring_points p where p.circuit_id = c.id)::int as points
       from circuits c
       join process_units u on u.id = c.unit_id
       join sites s on s.id = c.site_id
      where s.owner_id = ? and c.site_id = ?
      order by u.tag, c.tag`,
    [ownerId, siteId],
  );
  return result.rows.map((row) => {
    const design = designOf(row);
    return {
      ...row,
      ...design,
      requiredThickness: requiredThicknessOf({ ...design, material_code: row.material_code }),
      tableSource: tableSourceOf(design),
    };
  });
}

export const circuitClashes = (tag: string): Record<string, FieldErrors> => ({
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

/** Numeric design columns (PostgreSQL numeric arrives as text; the snapshot holds numbers). */
const DESIGN_NUMBERS = [
  "outside_diameter_mm",
  "nominal_wall_mm",
  "mill_tolerance_pct",
  "design_pressure_mpa",
  "design_temperature_c",
  "allowable_stress_mpa",
  "joint_factor_e",
  "weld_factor_w",
  "y_coefficient",
  "corrosion_allowance_mm",
  "structural_minimum_mm",
] as const;
type DesignNumber = (typeof DESIGN_NUMBERS)[number];
export type CircuitDesign = Record<DesignNumber, number | null> & {
  nps: string | null;
  schedule: string | null;
  structural_minimum_reason: string | null;
  piping_class: number | null;
  outside_diameter_from_table: boolean;
  nominal_wall_from_table: boolean;
};
export const DESIGN_COLUMNS = [
  ...DESIGN_NUMBERS,
  "nps",
  "schedule",
  "structural_minimum_reason",
  "piping_class",
  "outside_diameter_from_table",
  "nominal_wall_from_table",
] as const;

export const tableSourceOf = (d: CircuitDesign): TableSourceView => ({
  outsideDiameter: d.outside_diameter_from_table ? tableSourceWords(d.nps, d.schedule, "od") : null,
  nominalWall: d.nominal_wall_from_table ? tableSourceWords(d.nps, d.schedule, "wall") : null,
});

export type CircuitSnapshot = {
  unit_id: string;
  tag: string;
  description: string;
  material_code: string;
  service: string;
} & CircuitDesign;
export type StoredDesign = Record<DesignNumber, string | number | null> & {
  nps: string | null;
  schedule: string | null;
  structural_minimum_reason: string | null;
  piping_class: number | null;
  outside_diameter_from_table: boolean;
  nominal_wall_from_table: boolean;
};

export const designOf = (c: StoredDesign): CircuitDesign => {
  const out = {
    nps: c.nps,
    schedule: c.schedule,
    structural_minimum_reason: c.structural_minimum_reason,
    piping_class: c.piping_class,
    outside_diameter_from_table: c.outside_diameter_from_table,
    nominal_wall_from_table: c.nominal_wall_from_table,
  } as CircuitDesign;
  for (const k of DESIGN_NUMBERS) out[k] = c[k] === null ? null : Number(c[k]);
  return out;
};
export const circuitSnapshot = (c: Omit<CircuitSnapshot, DesignNumber> & StoredDesign): CircuitSnapshot => ({
  unit_id: c.unit_id,
  tag: c.tag,
  description: c.description,
  material_code: c.material_code,
  service: c.service,
  ...designOf(c),
});
const orNull = (v: number | undefined) => (v === undefined ? null : v);
const textOrNull = (v: string) => (v === "" ? null : v);
export const fromForm = (v: z.output<typeof circuitSchema>): CircuitSnapshot => {
  const table = tableDimensionsOf({ nps: v.nps, schedule: v.schedule });
  const od = v.outside_diameter_mm ?? table.outsideDiameterMm;
  const wall = v.nominal_wall_mm ?? table.nominalWallMm;
  return {
    unit_id: v.unit_id,
    tag: v.tag,
    description: v.description,
    material_code: v.material,
    service: v.service,
    nps: textOrNull(v.nps),
    schedule: textOrNull(v.schedule),
    outside_diameter_mm: orNull(od),
    nominal_wall_mm: orNull(wall),
    outside_diameter_from_table: v.outside_diameter_mm === undefined && od !== undefined,
    nominal_wall_from_table: v.nominal_wall_mm === undefined && wall !== undefined,
    mill_tolerance_pct: v.mill_tolerance_pct ?? 12.5,
    design_pressure_mpa: orNull(v.design_pressure_mpa),
    design_temperature_c: orNull(v.design_temperature_c),
    allowable_stress_mpa: orNull(v.allowable_stress_mpa),
    joint_factor_e: orNull(v.joint_factor_e),
    weld_factor_w: v.weld_factor_w ?? 1,
    y_coefficient: orNull(v.y_coefficient),
    corrosion_allowance_mm: orNull(v.corrosion_allowance_mm),
    structural_minimum_mm: orNull(v.structural_minimum_mm),
    structural_minimum_reason: v.structural_minimum_mm === undefined ? null : textOrNull(v.structural_minimum_reason),
    piping_class: v.piping_class,
  };
};
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
  const v = parseCircuit(input);
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
  const v = parseCircuit(input);
  return auditedWrite(
    conn,
    { ownerId, actor, requestId },
    async ({ trx, record }) => {
      const before: (Omit<CircuitSnapshot, DesignNumber> & StoredDesign & { id: string; site_id: string }) | undefined =
        await trx("circuits as c")
          .join("sites as s", "s.id", "c.site_id")
          .where({ "c.id": circuitId, "s.owner_id": ownerId })
          .forUpdate("c")
          .first(
            "c.id",
            "c.site_id",
            "c.unit_id",
            "c.tag",
            "c.description",
            "c.material_code",
            "c.service",
            ...DESIGN_COLUMNS.map((k) => `c.${k}`),
          );
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
      const designChanged = changedKeys(previous, after).some(
        (k) => k === "material_code" || (DESIGN_COLUMNS as readonly string[]).includes(k),
      );
      if (designChanged)
        await queueLifeRecompute(trx, {
          ownerId,
          trigger: "design",
          reason: `The design data of circuit ${after.tag} changed.`,
          requestedBy: actor.userId,
        });
      return { id: circuitId, siteId, changed: true };
    },
    circuitClashes(v.tag),
  );
}

export type CircuitPage = CircuitRow & {
  site_id: string;
  site_name: string;
  site_code: string;
  time_zone: string;
  piping_class: number | null;
};

/** One of the owner's circuits with its site, design data and required thickness; undefined when not theirs. */
export async function getCircuit(conn: Db, ownerId: string, circuitId: string): Promise<CircuitPage | undefined> {
  if (!isUuid(circuitId)) return undefined;
  const result = await conn.raw<{
    rows: Array<StoredCircuitRow & { site_id: string; site_name: string; site_code: string; time_zone: string }>;
  }>(
    `select c.id, c.unit_id, u.tag as unit_tag, c.tag, c.description, c.material_code, c.service,
            ${DESIGN_COLUMNS.map((k) => `c.${k}`).join(", ")},
            (select count(*) from monitoring_points p where p.circuit_id = c.id)::int as points,
            s.id as site_id, s.name as site_name, s.code as site_code, s.time_zone
       from circuits c
       join process_units u on u.id = c.unit_id
       join sites s on s.id = c.site_id
      where s.owner_id = ? and c.id = ?`,
    [ownerId, circuitId],
  );
  const row = result.rows[0];
  if (!row) return undefined;
  const design = designOf(row);
  return {
    ...row,
    ...design,
    requiredThickness: requiredThicknessOf({ ...design, material_code: row.material_code }),
    tableSource: tableSourceOf(design),
  };
}
