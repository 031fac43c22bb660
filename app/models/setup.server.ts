import { parse as parseCsv } from "csv-parse/sync";
import { z } from "zod";
import {
  COUPON_SHAPES,
  MATERIALS,
  couponArea,
  findMaterial,
  validateThresholds,
  type CouponGeometry,
  type SeverityThresholds,
} from "../domain/index.ts";
import type { Db } from "../services/db.server";
import { isUuid } from "../services/guards.server";
import { toCsv } from "../services/csv";
import { listAudit, recordAudit, type Actor, type AuditRow } from "./audit.server";

/**
 * The owner's set-up: sites, process units, circuits, monitoring points, the coupon
 * stock and the owner's settings (severity thresholds, minimum exposure).
 *
 * Every function takes the owner (tenant) id and filters by it in SQL, so an id of
 * another owner finds nothing: reads return undefined, writes throw NotFoundInTenant.
 * Writes validate their input with the zod schemas below (one per form), run in one
 * transaction and append an audit event per changed record in that transaction.
 * Input problems — including unique-constraint clashes — come back as field errors
 * in words, never as exceptions.
 */

// ── Results and errors ─────────────────────────────────────────────────────────

export type FieldErrors = Record<string, string>;
/** A write either succeeded or names, per field, what to correct. */
export type WriteResult<T = { id: string }> = ({ ok: true } & T) | { ok: false; errors: FieldErrors };

/** The record does not exist for this owner (or belongs to another one): a 404, never a 403. */
export class NotFoundInTenant extends Error {
  constructor(what: string) {
    super(`${what} not found for this owner`);
    this.name = "NotFoundInTenant";
  }
}

/** Values a form sends (strings), or typed values from code; the schemas accept both. */
export type FormInput = Record<string, unknown>;

function fieldErrorsOf(error: z.ZodError): FieldErrors {
  const errors: FieldErrors = {};
  for (const issue of error.issues) {
    const key = issue.path.length > 0 ? String(issue.path[0]) : "form";
    errors[key] ??= issue.message;
  }
  return errors;
}

type PgError = { code?: string; constraint?: string; detail?: string };
const uniqueViolation = (error: unknown): string | undefined =>
  (error as PgError)?.code === "23505" ? ((error as PgError).constraint ?? "") : undefined;

// ── Field helpers (shared by the forms and the CSV import) ─────────────────────

const blank = (v: unknown) => v === undefined || v === null || (typeof v === "string" && v.trim() === "");

const requiredText = (what: string, max: number) =>
  z
    .string({ error: `Enter ${what}.` })
    .trim()
    .min(1, `Enter ${what}.`)
    .max(max, `Keep ${what} to ${max} characters.`);

const optionalText = (what: string, max: number) =>
  z.preprocess(
    (v) => (blank(v) ? "" : v),
    z
      .string({ error: `Enter ${what} as text.` })
      .trim()
      .max(max, `Keep ${what} to ${max} characters.`),
  );

const tagPattern = /^[A-Za-z0-9][A-Za-z0-9 ._/#-]*$/;
const tagField = (what: string) =>
  requiredText(what, 40).regex(
    tagPattern,
    `Start ${what} with a letter or digit; then use letters, digits, spaces and . _ / # - only.`,
  );

const plainDecimal = /^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/;

/**
 * Reads a number as a person typed it, explaining the usual slips in words: a decimal
 * comma, thousands separators, a unit typed into the box.
 */
export function readDecimal(raw: unknown): { value: number } | { empty: true } | { problem: string } {
  if (typeof raw === "number")
    return Number.isFinite(raw) ? { value: raw } : { problem: "this is not a finite number" };
  if (blank(raw)) return { empty: true };
  if (typeof raw !== "string") return { problem: "this is not a number" };
  const text = raw.trim().replace(/^\+/, "");
  if (/^-?\d+,\d+$/.test(text)) return { problem: `'${raw.trim()}' uses a decimal comma; use a point` };
  if (/^-?\d{1,3}(,\d{3})+(\.\d+)?$/.test(text))
    return {
      problem: `'${raw.trim()}' has a thousands separator; write the number without it, with a point for decimals`,
    };
  if (/^-?[\d.]+\s*[^\d\s.,]+$/.test(text))
    return { problem: `'${raw.trim()}' has a unit in it; type the number only` };
  if (!plainDecimal.test(text)) return { problem: `'${raw.trim()}' is not a number` };
  return { value: Number(text) };
}

/** Decimals as written ("12.3400" has 4): what a person claims to have measured. */
function decimalsOf(raw: unknown): number {
  if (typeof raw === "number") {
    const s = String(raw);
    if (/e-/i.test(s)) return Number(s.split(/e-/i)[1]) + (s.split(/e/i)[0].split(".")[1]?.length ?? 0);
    return s.split(".")[1]?.length ?? 0;
  }
  const s = String(raw).trim();
  if (/e/i.test(s)) return decimalsOf(Number(s));
  return s.split(".")[1]?.length ?? 0;
}

type DecimalRule = {
  /** "the length", "the initial mass": used in messages. */
  what: string;
  unit: string;
  /** Strictly greater than. */
  gt?: number;
  /** At least. */
  min?: number;
  max: number;
  decimals: number;
  /** Why the decimals are limited, said in the message. */
  decimalsWhy?: string;
};

function checkDecimal(raw: unknown, rule: DecimalRule, ctx: z.RefinementCtx): number | undefined {
  const read = readDecimal(raw);
  if ("empty" in read) return undefined;
  if ("problem" in read) {
    ctx.addIssue({ code: "custom", message: `${cap(read.problem)}.` });
    return z.NEVER;
  }
  const v = read.value;
  const unit = rule.unit ? ` ${rule.unit}` : "";
  if (rule.gt !== undefined && !(v > rule.gt)) {
    ctx.addIssue({ code: "custom", message: `${cap(rule.what)} must be more than ${rule.gt}${unit}.` });
    return z.NEVER;
  }
  if (rule.min !== undefined && v < rule.min) {
    ctx.addIssue({ code: "custom", message: `${cap(rule.what)} must be at least ${rule.min}${unit}.` });
    return z.NEVER;
  }
  if (v > rule.max) {
    ctx.addIssue({ code: "custom", message: `${cap(rule.what)} must be at most ${rule.max}${unit}.` });
    return z.NEVER;
  }
  const places = decimalsOf(raw);
  if (places > rule.decimals) {
    ctx.addIssue({
      code: "custom",
      message: `${cap(rule.what)} takes at most ${rule.decimals} decimal${rule.decimals === 1 ? "" : "s"}${
        rule.decimalsWhy ? ` (${rule.decimalsWhy})` : ""
      }; '${String(raw).trim()}' has ${places}.`,
    });
    return z.NEVER;
  }
  return v;
}

const cap = (s: string) => s.charAt(0).toUpperCase() + s.slice(1);

const optionalDecimal = (rule: DecimalRule) =>
  z
    .unknown()
    .optional()
    .transform((raw, ctx) => checkDecimal(raw, rule, ctx));
const requiredDecimal = (rule: DecimalRule) =>
  z
    .unknown()
    .optional()
    .transform((raw, ctx): number => {
      if (blank(raw)) {
        ctx.addIssue({ code: "custom", message: `Enter ${rule.what} in ${rule.unit}.` });
        return z.NEVER;
      }
      return checkDecimal(raw, rule, ctx) as number;
    });

const wholeNumber = (what: string, unit: string, min: number, max: number, fallback?: number) =>
  z
    .unknown()
    .optional()
    .transform((raw, ctx): number => {
      if (blank(raw)) {
        if (fallback !== undefined) return fallback;
        ctx.addIssue({ code: "custom", message: `Enter ${what} in ${unit}.` });
        return z.NEVER;
      }
      const read = readDecimal(raw);
      if ("problem" in read || "empty" in read) {
        ctx.addIssue({
          code: "custom",
          message: "problem" in read ? `${cap(read.problem)}.` : `Enter ${what} in ${unit}.`,
        });
        return z.NEVER;
      }
      if (!Number.isInteger(read.value) || read.value < min || read.value > max) {
        ctx.addIssue({ code: "custom", message: `${cap(what)} must be a whole number from ${min} to ${max} ${unit}.` });
        return z.NEVER;
      }
      return read.value;
    });

/**
 * A checkbox: forms send a hidden "off" before the box, so an unticked box still
 * says so; a box that was never on the form (code, tests) keeps the default.
 */
const checkbox = (fallback: boolean) =>
  z
    .unknown()
    .optional()
    .transform((v) => {
      if (v === undefined || v === null) return fallback;
      if (typeof v === "boolean") return v;
      return v === "on" || v === "true" || v === "1";
    });

const idField = (message: string) => z.string({ error: message }).trim().refine(isUuid, message);

// ── Sites ──────────────────────────────────────────────────────────────────────

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
  const result = await conn.raw(
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
  return result.rows as SetupSiteRow[];
}

export type SetupSite = { id: string; name: string; code: string; time_zone: string };

/** One of the owner's sites, or undefined (malformed id, another owner's site). */
export async function getSetupSite(conn: Db, ownerId: string, siteId: string): Promise<SetupSite | undefined> {
  if (!isUuid(siteId)) return undefined;
  return conn("sites").where({ id: siteId, owner_id: ownerId }).first("id", "name", "code", "time_zone");
}

const siteSnapshot = (s: SetupSite) => ({ name: s.name, code: s.code, time_zone: s.time_zone });

function siteConflict(constraint: string, code: string): FieldErrors | undefined {
  if (constraint === "sites_owner_code_key")
    return { code: `Another of your sites already uses the code ${code}; choose a different one.` };
  return undefined;
}

export async function createSite(
  conn: Db,
  ownerId: string,
  actor: Actor,
  input: FormInput,
  requestId?: string | null,
): Promise<WriteResult<{ id: string; code: string }>> {
  const parsed = siteSchema.safeParse(input);
  if (!parsed.success) return { ok: false, errors: fieldErrorsOf(parsed.error) };
  const v = parsed.data;
  try {
    return await conn.transaction(async (trx) => {
      const [site] = await trx("sites")
        .insert({ owner_id: ownerId, name: v.name, code: v.code, time_zone: v.time_zone })
        .returning(["id", "name", "code", "time_zone"]);
      await recordAudit(trx, {
        ownerId,
        actor,
        action: "site.created",
        recordType: "site",
        recordId: site.id,
        after: siteSnapshot(site),
        requestId,
      });
      return { ok: true as const, id: site.id as string, code: site.code as string };
    });
  } catch (error) {
    const errors = siteConflict(uniqueViolation(error) ?? "-", v.code);
    if (errors) return { ok: false, errors };
    throw error;
  }
}

export async function updateSite(
  conn: Db,
  ownerId: string,
  actor: Actor,
  siteId: string,
  input: FormInput,
  requestId?: string | null,
): Promise<WriteResult<{ id: string; changed: boolean }>> {
  if (!isUuid(siteId)) throw new NotFoundInTenant("site");
  const parsed = siteSchema.safeParse(input);
  if (!parsed.success) return { ok: false, errors: fieldErrorsOf(parsed.error) };
  const v = parsed.data;
  try {
    return await conn.transaction(async (trx) => {
      const before = await trx("sites")
        .where({ id: siteId, owner_id: ownerId })
        .forUpdate()
        .first("id", "name", "code", "time_zone");
      if (!before) throw new NotFoundInTenant("site");
      if (before.name === v.name && before.code === v.code && before.time_zone === v.time_zone)
        return { ok: true as const, id: siteId, changed: false };
      const [after] = await trx("sites")
        .where({ id: siteId, owner_id: ownerId })
        .update({ name: v.name, code: v.code, time_zone: v.time_zone, updated_at: trx.fn.now() })
        .returning(["id", "name", "code", "time_zone"]);
      await recordAudit(trx, {
        ownerId,
        actor,
        action: "site.updated",
        recordType: "site",
        recordId: siteId,
        before: siteSnapshot(before),
        after: siteSnapshot(after),
        requestId,
      });
      return { ok: true as const, id: siteId, changed: true };
    });
  } catch (error) {
    const errors = siteConflict(uniqueViolation(error) ?? "-", v.code);
    if (errors) return { ok: false, errors };
    throw error;
  }
}

// ── Process units ──────────────────────────────────────────────────────────────

export const unitSchema = z.object({
  tag: tagField("the unit tag"),
  description: optionalText("the description", 300),
});

export type UnitRow = { id: string; tag: string; description: string; circuits: number; points: number };

export async function listUnits(conn: Db, ownerId: string, siteId: string): Promise<UnitRow[]> {
  if (!isUuid(siteId)) return [];
  const result = await conn.raw(
    `select u.id, u.tag, u.description,
            (select count(*) from circuits c where c.unit_id = u.id)::int as circuits,
            (select count(*) from monitoring_points p join circuits c on c.id = p.circuit_id where c.unit_id = u.id)::int as points
       from process_units u
       join sites s on s.id = u.site_id
      where s.owner_id = ? and u.site_id = ?
      order by u.tag`,
    [ownerId, siteId],
  );
  return result.rows as UnitRow[];
}

const unitConflict = (constraint: string | undefined, tag: string): FieldErrors | undefined =>
  constraint === "process_units_site_tag_key"
    ? { tag: `This site already has a unit tagged ${tag}; unit tags are unique within a site.` }
    : undefined;

export async function createUnit(
  conn: Db,
  ownerId: string,
  actor: Actor,
  siteId: string,
  input: FormInput,
  requestId?: string | null,
): Promise<WriteResult> {
  if (!isUuid(siteId)) throw new NotFoundInTenant("site");
  const parsed = unitSchema.safeParse(input);
  if (!parsed.success) return { ok: false, errors: fieldErrorsOf(parsed.error) };
  const v = parsed.data;
  try {
    return await conn.transaction(async (trx) => {
      const site = await trx("sites").where({ id: siteId, owner_id: ownerId }).first("id");
      if (!site) throw new NotFoundInTenant("site");
      const [unit] = await trx("process_units")
        .insert({ site_id: siteId, tag: v.tag, description: v.description })
        .returning(["id", "tag", "description"]);
      await recordAudit(trx, {
        ownerId,
        actor,
        action: "process_unit.created",
        recordType: "process_unit",
        recordId: unit.id,
        after: { site_id: siteId, tag: unit.tag, description: unit.description },
        requestId,
      });
      return { ok: true as const, id: unit.id as string };
    });
  } catch (error) {
    const errors = unitConflict(uniqueViolation(error), v.tag);
    if (errors) return { ok: false, errors };
    throw error;
  }
}

export async function updateUnit(
  conn: Db,
  ownerId: string,
  actor: Actor,
  unitId: string,
  input: FormInput,
  requestId?: string | null,
): Promise<WriteResult<{ id: string; siteId: string; changed: boolean }>> {
  if (!isUuid(unitId)) throw new NotFoundInTenant("process unit");
  const parsed = unitSchema.safeParse(input);
  if (!parsed.success) return { ok: false, errors: fieldErrorsOf(parsed.error) };
  const v = parsed.data;
  try {
    return await conn.transaction(async (trx) => {
      const before = await trx("process_units as u")
        .join("sites as s", "s.id", "u.site_id")
        .where({ "u.id": unitId, "s.owner_id": ownerId })
        .forUpdate("u")
        .first("u.id", "u.site_id", "u.tag", "u.description");
      if (!before) throw new NotFoundInTenant("process unit");
      if (before.tag === v.tag && before.description === v.description)
        return { ok: true as const, id: unitId, siteId: before.site_id as string, changed: false };
      await trx("process_units")
        .where({ id: unitId })
        .update({ tag: v.tag, description: v.description, updated_at: trx.fn.now() });
      await recordAudit(trx, {
        ownerId,
        actor,
        action: "process_unit.updated",
        recordType: "process_unit",
        recordId: unitId,
        before: { tag: before.tag, description: before.description },
        after: { tag: v.tag, description: v.description },
        requestId,
      });
      return { ok: true as const, id: unitId, siteId: before.site_id as string, changed: true };
    });
  } catch (error) {
    const errors = unitConflict(uniqueViolation(error), v.tag);
    if (errors) return { ok: false, errors };
    throw error;
  }
}

// ── Circuits ───────────────────────────────────────────────────────────────────

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
  const result = await conn.raw(
    `select c.id, c.unit_id, u.tag as unit_tag, c.tag, c.description, c.material_code, c.service,
            (select count(*) from monitoring_points p where p.circuit_id = c.id)::int as points
       from circuits c
       join process_units u on u.id = c.unit_id
       join sites s on s.id = c.site_id
      where s.owner_id = ? and c.site_id = ?
      order by u.tag, c.tag`,
    [ownerId, siteId],
  );
  return result.rows as CircuitRow[];
}

const circuitConflict = (constraint: string | undefined, tag: string): FieldErrors | undefined =>
  constraint === "circuits_site_tag_key"
    ? { tag: `This site already has a circuit tagged ${tag}; circuit tags are unique within a site.` }
    : undefined;

/** The unit, if it is one of this owner's at this site. */
async function unitAtSite(trx: Db, ownerId: string, siteId: string, unitId: string) {
  return trx("process_units as u")
    .join("sites as s", "s.id", "u.site_id")
    .where({ "u.id": unitId, "u.site_id": siteId, "s.owner_id": ownerId })
    .first("u.id", "u.tag");
}

const circuitSnapshot = (c: {
  unit_id: string;
  tag: string;
  description: string;
  material_code: string;
  service: string;
}) => ({
  unit_id: c.unit_id,
  tag: c.tag,
  description: c.description,
  material_code: c.material_code,
  service: c.service,
});

export async function createCircuit(
  conn: Db,
  ownerId: string,
  actor: Actor,
  siteId: string,
  input: FormInput,
  requestId?: string | null,
): Promise<WriteResult> {
  if (!isUuid(siteId)) throw new NotFoundInTenant("site");
  const parsed = circuitSchema.safeParse(input);
  if (!parsed.success) return { ok: false, errors: fieldErrorsOf(parsed.error) };
  const v = parsed.data;
  try {
    return await conn.transaction(async (trx) => {
      const site = await trx("sites").where({ id: siteId, owner_id: ownerId }).first("id");
      if (!site) throw new NotFoundInTenant("site");
      if (!(await unitAtSite(trx, ownerId, siteId, v.unit_id)))
        return { ok: false as const, errors: { unit_id: "Choose one of this site’s process units." } };
      const row = {
        unit_id: v.unit_id,
        tag: v.tag,
        description: v.description,
        material_code: v.material,
        service: v.service,
      };
      const [circuit] = await trx("circuits")
        .insert({ ...row, site_id: siteId })
        .returning(["id"]);
      await recordAudit(trx, {
        ownerId,
        actor,
        action: "circuit.created",
        recordType: "circuit",
        recordId: circuit.id,
        after: { site_id: siteId, ...circuitSnapshot(row) },
        requestId,
      });
      return { ok: true as const, id: circuit.id as string };
    });
  } catch (error) {
    const errors = circuitConflict(uniqueViolation(error), v.tag);
    if (errors) return { ok: false, errors };
    throw error;
  }
}

export async function updateCircuit(
  conn: Db,
  ownerId: string,
  actor: Actor,
  circuitId: string,
  input: FormInput,
  requestId?: string | null,
): Promise<WriteResult<{ id: string; siteId: string; changed: boolean }>> {
  if (!isUuid(circuitId)) throw new NotFoundInTenant("circuit");
  const parsed = circuitSchema.safeParse(input);
  if (!parsed.success) return { ok: false, errors: fieldErrorsOf(parsed.error) };
  const v = parsed.data;
  try {
    return await conn.transaction(async (trx) => {
      const before = await trx("circuits as c")
        .join("sites as s", "s.id", "c.site_id")
        .where({ "c.id": circuitId, "s.owner_id": ownerId })
        .forUpdate("c")
        .first("c.id", "c.site_id", "c.unit_id", "c.tag", "c.description", "c.material_code", "c.service");
      if (!before) throw new NotFoundInTenant("circuit");
      const siteId = before.site_id as string;
      if (!(await unitAtSite(trx, ownerId, siteId, v.unit_id)))
        return { ok: false as const, errors: { unit_id: "Choose one of this site’s process units." } };
      const after = circuitSnapshot({
        unit_id: v.unit_id,
        tag: v.tag,
        description: v.description,
        material_code: v.material,
        service: v.service,
      });
      const previous = circuitSnapshot(before);
      if (JSON.stringify(after) === JSON.stringify(previous))
        return { ok: true as const, id: circuitId, siteId, changed: false };
      await trx("circuits")
        .where({ id: circuitId })
        .update({ ...after, updated_at: trx.fn.now() });
      await recordAudit(trx, {
        ownerId,
        actor,
        action: "circuit.updated",
        recordType: "circuit",
        recordId: circuitId,
        before: previous,
        after,
        requestId,
      });
      return { ok: true as const, id: circuitId, siteId, changed: true };
    });
  } catch (error) {
    const errors = circuitConflict(uniqueViolation(error), v.tag);
    if (errors) return { ok: false, errors };
    throw error;
  }
}

// ── Monitoring points ──────────────────────────────────────────────────────────

export const MOUNTINGS = ["flush", "intrusive"] as const;
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
  const result = await conn.raw(`${pointSelect} where p.owner_id = ? and p.site_id = ? order by p.tag`, [
    ownerId,
    siteId,
  ]);
  return result.rows as PointRow[];
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
  const result = await conn.raw(
    `select q.*, s.id as site_id, s.name as site_name, s.code as site_code, s.time_zone as site_time_zone,
            c.material_code, p.created_at, p.updated_at
       from (${pointSelect} where p.owner_id = ? and p.id = ?) q
       join monitoring_points p on p.id = q.id
       join circuits c on c.id = p.circuit_id
       join sites s on s.id = p.site_id
      where s.owner_id = ?`,
    [ownerId, pointId, ownerId],
  );
  return result.rows[0] as PointDetail | undefined;
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
const pointSnapshot = (p: PointValues | Record<string, any>) => ({
  circuit_id: p.circuit_id,
  tag: p.tag,
  access_fitting: p.access_fitting,
  orientation: p.orientation,
  mounting: p.mounting,
  planned_exposure_days: p.planned_exposure_days,
  active: p.active,
});

export async function createPoint(
  conn: Db,
  ownerId: string,
  actor: Actor,
  siteId: string,
  input: FormInput,
  requestId?: string | null,
): Promise<WriteResult<{ id: string; tag: string }>> {
  if (!isUuid(siteId)) throw new NotFoundInTenant("site");
  const parsed = pointSchema.safeParse(input);
  if (!parsed.success) return { ok: false, errors: await pointFormErrors(conn, ownerId, parsed.error, input) };
  const v = parsed.data;
  try {
    return await conn.transaction(async (trx) => {
      const site = await trx("sites").where({ id: siteId, owner_id: ownerId }).first("id");
      if (!site) throw new NotFoundInTenant("site");
      if (!(await circuitAtSite(trx, ownerId, siteId, v.circuit_id)))
        return { ok: false as const, errors: { circuit_id: "Choose one of this site’s circuits." } };
      const [point] = await trx("monitoring_points")
        .insert({ owner_id: ownerId, site_id: siteId, kind: "coupon", ...pointSnapshot(v) })
        .returning(["id", "tag"]);
      await recordAudit(trx, {
        ownerId,
        actor,
        action: "monitoring_point.created",
        recordType: "monitoring_point",
        recordId: point.id,
        after: { site_id: siteId, ...pointSnapshot(v) },
        requestId,
      });
      return { ok: true as const, id: point.id as string, tag: point.tag as string };
    });
  } catch (error) {
    if (uniqueViolation(error) === "monitoring_points_owner_tag_key")
      return { ok: false, errors: await pointTagConflict(conn, ownerId, v.tag) };
    throw error;
  }
}

export async function updatePoint(
  conn: Db,
  ownerId: string,
  actor: Actor,
  pointId: string,
  input: FormInput,
  requestId?: string | null,
): Promise<WriteResult<{ id: string; changed: boolean }>> {
  if (!isUuid(pointId)) throw new NotFoundInTenant("monitoring point");
  const parsed = pointSchema.safeParse(input);
  if (!parsed.success) return { ok: false, errors: await pointFormErrors(conn, ownerId, parsed.error, input, pointId) };
  const v = parsed.data;
  try {
    return await conn.transaction(async (trx) => {
      const before = await trx("monitoring_points")
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
        return {
          ok: false as const,
          errors: { circuit_id: "Choose one of this site’s circuits; a point cannot move to another site." },
        };
      const after = pointSnapshot(v);
      const previous = pointSnapshot(before);
      if (JSON.stringify(after) === JSON.stringify(previous)) return { ok: true as const, id: pointId, changed: false };
      await trx("monitoring_points")
        .where({ id: pointId, owner_id: ownerId })
        .update({ ...after, updated_at: trx.fn.now() });
      await recordAudit(trx, {
        ownerId,
        actor,
        action: "monitoring_point.updated",
        recordType: "monitoring_point",
        recordId: pointId,
        before: previous,
        after,
        requestId,
      });
      return { ok: true as const, id: pointId, changed: true };
    });
  } catch (error) {
    if (uniqueViolation(error) === "monitoring_points_owner_tag_key")
      return { ok: false, errors: await pointTagConflict(conn, ownerId, v.tag) };
    throw error;
  }
}

// ── Coupons ────────────────────────────────────────────────────────────────────

export type CouponShape = (typeof COUPON_SHAPES)[number];

/**
 * The coupon columns, shared by the single-coupon form (field names) and the CSV
 * import (header), with units in the names so a spreadsheet says what it holds.
 */
export const COUPON_COLUMNS = [
  { name: "serial", required: true, about: "The serial stamped on the coupon; unique in your stock." },
  {
    name: "material",
    required: true,
    about: `A material key (${MATERIALS.map((m) => m.key).join(", ")}) or its UNS number.`,
  },
  { name: "shape", required: true, about: "strip, disc, rod or flush-disc." },
  { name: "length_mm", required: false, about: "Strip and rod: length in mm." },
  { name: "width_mm", required: false, about: "Strip: width in mm." },
  { name: "thickness_mm", required: false, about: "Strip and disc: thickness in mm." },
  { name: "diameter_mm", required: false, about: "Disc, rod and flush disc: diameter in mm." },
  {
    name: "hole_diameter_mm",
    required: false,
    about: "Strip and disc: mounting-hole diameter in mm; empty or 0 = no hole.",
  },
  { name: "exposed_ends", required: false, about: "Rod: how many end faces are wetted, 0, 1 or 2." },
  { name: "initial_mass_g", required: true, about: "Mass before exposure in g, to 0.1 mg (4 decimals at most)." },
  { name: "balance_resolution_g", required: false, about: "Resolution of the balance in g; empty = 0.0001." },
  {
    name: "density_g_cm3",
    required: false,
    about: "Only to override the material’s density, in g/cm³; then say where it comes from.",
  },
  {
    name: "density_source",
    required: false,
    about: "Where an overriding density comes from, e.g. the mill certificate.",
  },
  { name: "lot", required: false, about: "Manufacturing lot." },
  { name: "certificate", required: false, about: "Certificate or traceability reference." },
] as const;
export type CouponColumn = (typeof COUPON_COLUMNS)[number]["name"];

/** Which dimensions each shape needs (the rest must stay empty). */
const SHAPE_FIELDS: Record<CouponShape, { needs: CouponColumn[]; may: CouponColumn[] }> = {
  strip: { needs: ["length_mm", "width_mm", "thickness_mm"], may: ["hole_diameter_mm"] },
  disc: { needs: ["diameter_mm", "thickness_mm"], may: ["hole_diameter_mm"] },
  rod: { needs: ["diameter_mm", "length_mm", "exposed_ends"], may: [] },
  "flush-disc": { needs: ["diameter_mm"], may: [] },
};
export const shapeFields = (shape: CouponShape): CouponColumn[] => [
  ...SHAPE_FIELDS[shape].needs,
  ...SHAPE_FIELDS[shape].may,
];

const DIMENSION_WORDS: Record<string, string> = {
  length_mm: "length",
  width_mm: "width",
  thickness_mm: "thickness",
  diameter_mm: "diameter",
  hole_diameter_mm: "hole diameter",
  exposed_ends: "number of exposed ends",
};
const SHAPE_WORDS: Record<CouponShape, string> = {
  strip: "A strip",
  disc: "A disc",
  rod: "A rod",
  "flush-disc": "A flush disc",
};

/** The calculation library's names for the geometry, mapped back to our columns. */
const GEOMETRY_FIELDS: Record<string, CouponColumn> = {
  lengthMm: "length_mm",
  widthMm: "width_mm",
  thicknessMm: "thickness_mm",
  diameterMm: "diameter_mm",
  holeDiameterMm: "hole_diameter_mm",
  exposedEnds: "exposed_ends",
};

/**
 * Turns a RangeError of couponArea ("holeDiameterMm must be < widthMm 10 (got 12): the
 * hole would be wider than the strip") into the field it concerns and a sentence.
 */
export function geometryFieldError(error: RangeError): { field: CouponColumn | "shape"; message: string } {
  const name = error.message.split(" ")[0];
  const field = GEOMETRY_FIELDS[name] ?? "shape";
  let message = error.message;
  for (const [lib, column] of Object.entries(GEOMETRY_FIELDS)) {
    const unit = column.endsWith("_mm") ? " mm" : "";
    message = message
      .replace(new RegExp(`< ${lib} ([0-9.]+)`), `less than the ${DIMENSION_WORDS[column]} of $1${unit}`)
      .replace(new RegExp(`\\b${lib}\\b`), `the ${DIMENSION_WORDS[column]}`);
  }
  message = message.replace(/\(got ([^)]+)\)/, (_, got) => `(you gave ${got}${field.endsWith("_mm") ? " mm" : ""})`);
  return { field, message: `${cap(message)}.` };
}

const dimension = (what: string) => optionalDecimal({ what, unit: "mm", gt: 0, max: 99_999, decimals: 3 });

/**
 * The coupon form's fields (the CSV columns). Each field is checked on its own, so one
 * mistake does not hide another; parseCoupon then checks the fields against each
 * other: the dimensions the shape needs, the geometry (through couponArea) and the
 * source of an overriding density.
 */
export const couponSchema = z.object({
  serial: requiredText("the coupon serial", 40).regex(
    /^[A-Za-z0-9][A-Za-z0-9._/-]*$/,
    "Use letters, digits and . _ / - only in the serial, starting with a letter or digit (no spaces).",
  ),
  material: z
    .string({ error: "Choose the coupon material." })
    .trim()
    .min(1, "Choose the coupon material.")
    .transform((v, ctx) => {
      try {
        return findMaterial(v).key;
      } catch {
        ctx.addIssue({
          code: "custom",
          message: `'${v}' is not a material Wallcast knows; use one of ${MATERIALS.map((m) => m.key).join(", ")} or its UNS number.`,
        });
        return z.NEVER;
      }
    }),
  shape: z
    .string({ error: "Choose the coupon shape: strip, disc, rod or flush-disc." })
    .trim()
    .toLowerCase()
    .pipe(z.enum(COUPON_SHAPES, { error: "Choose the coupon shape: strip, disc, rod or flush-disc." })),
  length_mm: dimension("the length"),
  width_mm: dimension("the width"),
  thickness_mm: dimension("the thickness"),
  diameter_mm: dimension("the diameter"),
  hole_diameter_mm: optionalDecimal({ what: "the hole diameter", unit: "mm", min: 0, max: 99_999, decimals: 3 }),
  exposed_ends: z
    .unknown()
    .optional()
    .transform((raw, ctx) => {
      if (blank(raw)) return undefined;
      const read = readDecimal(raw);
      if (!("value" in read) || ![0, 1, 2].includes(read.value)) {
        ctx.addIssue({ code: "custom", message: "The number of exposed ends must be 0, 1 or 2." });
        return z.NEVER;
      }
      return read.value as 0 | 1 | 2;
    }),
  initial_mass_g: requiredDecimal({
    what: "the initial mass",
    unit: "g",
    min: 0.0001,
    max: 99_999_999,
    decimals: 4,
    decimalsWhy: "it is recorded to 0.1 mg",
  }),
  balance_resolution_g: optionalDecimal({ what: "the balance resolution", unit: "g", gt: 0, max: 1, decimals: 5 }),
  density_g_cm3: optionalDecimal({ what: "the density", unit: "g/cm³", gt: 0.5, max: 25, decimals: 3 }),
  density_source: optionalText("the density source", 200),
  lot: optionalText("the lot", 80),
  certificate: optionalText("the certificate", 120),
});

export type CouponRecord = {
  serial: string;
  materialCode: string;
  densityGcm3: number;
  densitySource: string;
  geometry: CouponGeometry;
  /** Exposed area from the geometry, cm². */
  areaCm2: number;
  initialMassG: number;
  balanceResolutionG: number;
  lot: string;
  certificate: string;
};
export type CouponIssue = { field: CouponColumn | "form"; message: string };

export function parseCoupon(
  input: FormInput,
): { ok: true; value: CouponRecord } | { ok: false; issues: CouponIssue[] } {
  const issues: CouponIssue[] = [];
  const v: Record<string, unknown> = {};
  for (const [field, schema] of Object.entries(couponSchema.shape)) {
    const r = (schema as z.ZodType).safeParse(input[field]);
    if (r.success) v[field] = r.data;
    else
      issues.push({ field: field as CouponColumn, message: r.error.issues[0]?.message ?? "This value is not valid." });
  }
  const failed = new Set(issues.map((i) => i.field));
  const ok = (...fields: CouponColumn[]) => fields.every((f) => !failed.has(f));
  const f = v as Partial<z.output<typeof couponSchema>>;

  if (ok("shape") && f.shape) {
    const shape = f.shape;
    const rule = SHAPE_FIELDS[shape];
    for (const d of rule.needs)
      if (ok(d) && f[d] === undefined)
        issues.push({ field: d, message: `${SHAPE_WORDS[shape]} coupon needs its ${DIMENSION_WORDS[d]}.` });
    for (const d of Object.keys(DIMENSION_WORDS) as CouponColumn[]) {
      if (rule.needs.includes(d) || rule.may.includes(d) || !ok(d)) continue;
      const value = f[d as keyof typeof f];
      if (value === undefined || (d === "hole_diameter_mm" && value === 0)) continue;
      issues.push({
        field: d,
        message: `${SHAPE_WORDS[shape]} coupon has no ${DIMENSION_WORDS[d]}; leave it empty (or check the shape).`,
      });
    }
  }
  let areaCm2: number | undefined;
  let geometry: CouponGeometry | undefined;
  const geometryFields = ["shape", ...Object.keys(DIMENSION_WORDS)] as CouponColumn[];
  if (geometryFields.every((g) => !issues.some((i) => i.field === g)) && f.shape) {
    geometry = geometryOf({ ...(f as GeometryColumns), hole_diameter_mm: f.hole_diameter_mm ?? 0 });
    try {
      areaCm2 = couponArea(geometry);
    } catch (error) {
      if (!(error instanceof RangeError)) throw error;
      const { field, message } = geometryFieldError(error);
      issues.push({ field, message });
    }
  }
  const material = ok("material") && f.material ? findMaterial(f.material) : undefined;
  const overridden =
    material !== undefined && f.density_g_cm3 !== undefined && f.density_g_cm3 !== material.densityGcm3;
  if (overridden && ok("density_g_cm3", "density_source") && f.density_source === "")
    issues.push({
      field: "density_source",
      message: `Say where the density ${f.density_g_cm3} g/cm³ comes from (e.g. the supplier’s certificate); the material’s own is ${material.densityGcm3} g/cm³.`,
    });

  if (issues.length > 0 || !material || !geometry || areaCm2 === undefined) {
    const order = COUPON_COLUMNS.map((c) => c.name as string);
    return { ok: false, issues: issues.sort((a, b) => order.indexOf(a.field) - order.indexOf(b.field)) };
  }
  return {
    ok: true,
    value: {
      serial: f.serial as string,
      materialCode: material.key,
      densityGcm3: overridden ? (f.density_g_cm3 as number) : material.densityGcm3,
      densitySource: overridden ? (f.density_source as string) : f.density_source || material.densitySource,
      geometry,
      areaCm2,
      initialMassG: f.initial_mass_g as number,
      balanceResolutionG: f.balance_resolution_g ?? 0.0001,
      lot: f.lot ?? "",
      certificate: f.certificate ?? "",
    },
  };
}

type GeometryColumns = {
  shape: CouponShape;
  length_mm?: number | string | null;
  width_mm?: number | string | null;
  thickness_mm?: number | string | null;
  diameter_mm?: number | string | null;
  hole_diameter_mm?: number | string | null;
  exposed_ends?: number | null;
};

/** The calculation library's geometry from coupon columns (stored rows or parsed input). */
export function geometryOf(c: GeometryColumns): CouponGeometry {
  const n = (v: number | string | null | undefined) => (v === null || v === undefined ? NaN : Number(v));
  switch (c.shape) {
    case "strip":
      return {
        shape: "strip",
        lengthMm: n(c.length_mm),
        widthMm: n(c.width_mm),
        thicknessMm: n(c.thickness_mm),
        holeDiameterMm: n(c.hole_diameter_mm ?? 0),
      };
    case "disc":
      return {
        shape: "disc",
        diameterMm: n(c.diameter_mm),
        thicknessMm: n(c.thickness_mm),
        holeDiameterMm: n(c.hole_diameter_mm ?? 0),
      };
    case "rod":
      return {
        shape: "rod",
        diameterMm: n(c.diameter_mm),
        lengthMm: n(c.length_mm),
        exposedEnds: n(c.exposed_ends) as 0 | 1 | 2,
      };
    case "flush-disc":
      return { shape: "flush-disc", diameterMm: n(c.diameter_mm) };
  }
}

function couponRow(ownerId: string, c: CouponRecord) {
  const g = c.geometry as CouponGeometry & Record<string, number | undefined>;
  return {
    owner_id: ownerId,
    serial: c.serial,
    material_code: c.materialCode,
    density_g_cm3: c.densityGcm3,
    density_source: c.densitySource,
    shape: g.shape,
    length_mm: g.lengthMm ?? null,
    width_mm: g.widthMm ?? null,
    thickness_mm: g.thicknessMm ?? null,
    diameter_mm: g.diameterMm ?? null,
    hole_diameter_mm: g.holeDiameterMm ?? 0,
    exposed_ends: g.shape === "rod" ? g.exposedEnds : null,
    initial_mass_g: c.initialMassG,
    balance_resolution_g: c.balanceResolutionG,
    lot: c.lot,
    certificate: c.certificate,
  };
}
const couponAuditSnapshot = (row: ReturnType<typeof couponRow>) => {
  const { owner_id: _owner, ...rest } = row;
  return rest;
};

export type CouponStatus = "in_stock" | "in_service" | "removed";

export type CouponListRow = {
  id: string;
  serial: string;
  material_code: string;
  density_g_cm3: number;
  density_source: string;
  shape: CouponShape;
  length_mm: number | null;
  width_mm: number | null;
  thickness_mm: number | null;
  diameter_mm: number | null;
  hole_diameter_mm: number;
  exposed_ends: number | null;
  /** Exposed area from the geometry, cm² (null only if a stored geometry is no longer valid). */
  area_cm2: number | null;
  initial_mass_g: number;
  balance_resolution_g: number;
  lot: string;
  certificate: string;
  status: CouponStatus;
  point_tag: string | null;
  site_code: string | null;
  installed_at: Date | null;
  removed_at: Date | null;
  created_at: Date;
};

const numOrNull = (v: unknown) => (v === null || v === undefined ? null : Number(v));

/** The owner's coupons with their state, derived from their exposure (a coupon is exposed once). */
export async function listCoupons(conn: Db, ownerId: string): Promise<CouponListRow[]> {
  const result = await conn.raw(
    `select k.id, k.serial, k.material_code, k.density_g_cm3, k.density_source, k.shape, k.length_mm, k.width_mm,
            k.thickness_mm, k.diameter_mm, k.hole_diameter_mm, k.exposed_ends, k.initial_mass_g, k.balance_resolution_g,
            k.lot, k.certificate, k.created_at, e.installed_at, e.removed_at, p.tag as point_tag, s.code as site_code,
            case when e.id is null then 'in_stock' when e.removed_at is null then 'in_service' else 'removed' end as status
       from coupons k
       left join coupon_exposures e on e.coupon_id = k.id and e.owner_id = k.owner_id
       left join monitoring_points p on p.id = e.point_id
       left join sites s on s.id = p.site_id
      where k.owner_id = ?
      order by k.serial`,
    [ownerId],
  );
  return (result.rows as Array<Record<string, any>>).map((r) => {
    let area: number | null = null;
    try {
      area = couponArea(geometryOf(r as GeometryColumns));
    } catch {
      area = null;
    }
    return {
      ...r,
      density_g_cm3: Number(r.density_g_cm3),
      length_mm: numOrNull(r.length_mm),
      width_mm: numOrNull(r.width_mm),
      thickness_mm: numOrNull(r.thickness_mm),
      diameter_mm: numOrNull(r.diameter_mm),
      hole_diameter_mm: Number(r.hole_diameter_mm),
      initial_mass_g: Number(r.initial_mass_g),
      balance_resolution_g: Number(r.balance_resolution_g),
      area_cm2: area,
    } as CouponListRow;
  });
}

/** Counts of the owner's coupons by state. */
export async function couponStock(conn: Db, ownerId: string): Promise<Record<CouponStatus, number>> {
  const result = await conn.raw(
    `select count(*) filter (where e.id is null)::int as in_stock,
            count(*) filter (where e.id is not null and e.removed_at is null)::int as in_service,
            count(*) filter (where e.removed_at is not null)::int as removed
       from coupons k left join coupon_exposures e on e.coupon_id = k.id and e.owner_id = k.owner_id
      where k.owner_id = ?`,
    [ownerId],
  );
  return result.rows[0];
}

const serialTaken = (serial: string) => `The serial ${serial} is already in your coupon stock; serials are unique.`;

/** Adds one coupon to the owner's stock. */
export async function createCoupon(
  conn: Db,
  ownerId: string,
  actor: Actor,
  input: FormInput,
  requestId?: string | null,
): Promise<WriteResult<{ id: string; serial: string; areaCm2: number }>> {
  const parsed = parseCoupon(input);
  if (!parsed.ok) return { ok: false, errors: Object.fromEntries(parsed.issues.map((i) => [i.field, i.message])) };
  const c = parsed.value;
  const row = couponRow(ownerId, c);
  try {
    return await conn.transaction(async (trx) => {
      const [coupon] = await trx("coupons").insert(row).returning(["id"]);
      await recordAudit(trx, {
        ownerId,
        actor,
        action: "coupon.created",
        recordType: "coupon",
        recordId: coupon.id,
        after: couponAuditSnapshot(row),
        requestId,
      });
      return { ok: true as const, id: coupon.id as string, serial: c.serial, areaCm2: c.areaCm2 };
    });
  } catch (error) {
    if (uniqueViolation(error) === "coupons_owner_serial_key")
      return { ok: false, errors: { serial: serialTaken(c.serial) } };
    throw error;
  }
}

// ── Coupon CSV import ──────────────────────────────────────────────────────────

/** One problem of an import: the file line (1 = header), the column, and what is wrong. */
export type CsvProblem = { line: number; column: string | null; value?: string; message: string };
export type CsvImportResult =
  { ok: true; count: number; serials: string[] } | { ok: false; problems: CsvProblem[]; rowsRead: number };

export const CSV_MAX_ROWS = 5000;
export const CSV_MAX_BYTES = 2_000_000;

const columnOrder: string[] = COUPON_COLUMNS.map((c) => c.name);
/** By line, then in the template's column order (stable for equal keys). */
const sortProblems = (problems: CsvProblem[]) =>
  problems
    .map((p, i) => ({ p, i }))
    .sort(
      (a, b) =>
        a.p.line - b.p.line ||
        columnOrder.indexOf(a.p.column ?? "") - columnOrder.indexOf(b.p.column ?? "") ||
        a.i - b.i,
    )
    .map(({ p }) => p);

/** "line 4, initial_mass_g: '12,3456' uses a decimal comma; use a point" */
export function describeProblem(p: CsvProblem): string {
  return `line ${p.line}${p.column ? `, ${p.column}` : ""}: ${p.message}`;
}

/** The template header: our own column names, units in the names. */
export function couponCsvTemplate(): string {
  const header = COUPON_COLUMNS.map((c) => c.name);
  const example = (values: Partial<Record<CouponColumn, string>>) => header.map((h) => values[h as CouponColumn] ?? "");
  return toCsv(header, [
    example({
      serial: "CS-24001",
      material: "carbon-steel",
      shape: "strip",
      length_mm: "76.2",
      width_mm: "12.7",
      thickness_mm: "1.6",
      hole_diameter_mm: "6.4",
      initial_mass_g: "11.8342",
      lot: "L-2408",
      certificate: "MC-2408-17",
    }),
    example({
      serial: "SS-24002",
      material: "ss-316l",
      shape: "disc",
      diameter_mm: "31.75",
      thickness_mm: "3.18",
      hole_diameter_mm: "7.9",
      initial_mass_g: "17.5021",
      balance_resolution_g: "0.0001",
      lot: "L-2409",
    }),
    example({
      serial: "CS-24003",
      material: "G10180",
      shape: "flush-disc",
      diameter_mm: "25.4",
      initial_mass_g: "4.2107",
      density_g_cm3: "7.85",
      density_source: "Supplier certificate MC-2410-02",
    }),
  ]);
}

/** Number of newlines inside a parsed record: a quoted value can span lines. */
const newlinesIn = (record: string[]) => record.reduce((n, f) => n + (f.match(/\n/g)?.length ?? 0), 0);

type ParsedCsvRow = { line: number; values: Record<string, string> };

/** Reads the file into header-keyed rows with their line numbers, or the problems that stop it. */
export function readCouponCsv(text: string): { rows: ParsedCsvRow[]; problems: CsvProblem[] } {
  const body = text.replace(/^\uFEFF/, "");
  if (body.trim() === "")
    return {
      rows: [],
      problems: [
        {
          line: 1,
          column: null,
          message: "The file is empty; its first line must be the header (download the template).",
        },
      ],
    };
  const garbled = body.indexOf("\uFFFD");
  if (garbled >= 0)
    return {
      rows: [],
      problems: [
        {
          line: body.slice(0, garbled).split("\n").length,
          column: null,
          message:
            "This line has characters that are not UTF-8 text; save the file as “CSV UTF-8” and import it again.",
        },
      ],
    };
  const firstLine = body.split(/\r?\n/, 1)[0];
  // Spreadsheets set to a decimal-comma locale save with semicolons (or tabs) between columns.
  const delimiter = firstLine.includes(",")
    ? ","
    : firstLine.includes(";")
      ? ";"
      : firstLine.includes("\t")
        ? "\t"
        : ",";
  let records: Array<{ record: string[]; info: { lines: number } }>;
  try {
    records = parseCsv(body, {
      bom: true,
      delimiter,
      info: true,
      relax_column_count: true,
      skip_empty_lines: true,
      skip_records_with_empty_values: true,
      trim: true,
    }) as unknown as Array<{ record: string[]; info: { lines: number } }>;
  } catch (error) {
    const e = error as { code?: string; lines?: number; message: string };
    const why =
      e.code === "CSV_QUOTE_NOT_CLOSED"
        ? "a quoted value is never closed; check the quotation marks"
        : e.code === "CSV_INVALID_CLOSING_QUOTE" || e.code === "CSV_NON_TRIMABLE_CHAR_AFTER_CLOSING_QUOTE"
          ? "a quotation mark sits in the middle of a value; put the whole value in quotes and double any quote inside it"
          : "the file is not valid CSV";
    return {
      rows: [],
      problems: [{ line: e.lines ?? 1, column: null, message: `The file could not be read: ${why}.` }],
    };
  }
  const [head, ...data] = records;
  const header = head.record.map((h) => h.trim().toLowerCase());
  const headerLine = head.info.lines - newlinesIn(head.record);
  const problems: CsvProblem[] = [];
  const known = new Set<string>(COUPON_COLUMNS.map((c) => c.name));
  const seen = new Set<string>();
  header.forEach((h, i) => {
    if (h === "")
      problems.push({ line: headerLine, column: `column ${i + 1}`, message: "This column has no name in the header." });
    else if (!known.has(h))
      problems.push({
        line: headerLine,
        column: h,
        message: `Unknown column '${h}'. The columns are: ${COUPON_COLUMNS.map((c) => c.name).join(", ")}.`,
      });
    else if (seen.has(h))
      problems.push({ line: headerLine, column: h, message: `The column '${h}' appears twice in the header.` });
    seen.add(h);
  });
  for (const c of COUPON_COLUMNS)
    if (c.required && !seen.has(c.name))
      problems.push({
        line: headerLine,
        column: c.name,
        message: `The header has no '${c.name}' column; it is required.`,
      });
  if (problems.length > 0) return { rows: [], problems };
  if (data.length === 0)
    return {
      rows: [],
      problems: [{ line: headerLine + 1, column: null, message: "The file has a header but no coupons below it." }],
    };
  if (data.length > CSV_MAX_ROWS)
    return {
      rows: [],
      problems: [
        {
          line: 1,
          column: null,
          message: `The file has ${data.length} coupons; import at most ${CSV_MAX_ROWS} at a time.`,
        },
      ],
    };

  const rows: ParsedCsvRow[] = [];
  for (const { record, info } of data) {
    const line = info.lines - newlinesIn(record);
    const extra = record.slice(header.length).filter((v) => v.trim() !== "");
    if (extra.length > 0) {
      problems.push({
        line,
        column: null,
        message: `This line has ${record.length} values but the header has ${header.length} columns; a value with a comma must be in quotes.`,
      });
      continue;
    }
    rows.push({ line, values: Object.fromEntries(header.map((h, i) => [h, record[i] ?? ""])) });
  }
  return { rows, problems };
}

/**
 * Imports coupons from CSV text, all or nothing: every line is checked (values,
 * geometry, duplicates in the file and in the stock) before anything is written; then
 * every coupon is inserted in one transaction with its audit event.
 */
export async function importCoupons(
  conn: Db,
  ownerId: string,
  actor: Actor,
  text: string,
  requestId?: string | null,
): Promise<CsvImportResult> {
  if (text.length > CSV_MAX_BYTES)
    return {
      ok: false,
      rowsRead: 0,
      problems: [
        { line: 1, column: null, message: `The file is larger than ${CSV_MAX_BYTES / 1_000_000} MB; split it.` },
      ],
    };
  const { rows, problems } = readCouponCsv(text);
  const valid: Array<{ line: number; coupon: CouponRecord }> = [];
  const bySerial = new Map<string, number>();
  for (const { line, values } of rows) {
    const parsed = parseCoupon(values);
    if (!parsed.ok)
      for (const issue of parsed.issues)
        problems.push({ line, column: issue.field, value: values[issue.field], message: issue.message });
    // Duplicates are worth knowing even on a line with other problems.
    const serial = parsed.ok
      ? parsed.value.serial
      : parsed.issues.some((i) => i.field === "serial")
        ? ""
        : values.serial.trim();
    if (serial) {
      const earlier = bySerial.get(serial);
      if (earlier !== undefined)
        problems.push({
          line,
          column: "serial",
          value: serial,
          message: `The serial ${serial} is already on line ${earlier} of this file.`,
        });
      else bySerial.set(serial, line);
    }
    if (parsed.ok) valid.push({ line, coupon: parsed.value });
  }
  if (bySerial.size > 0) {
    const existing = await conn("coupons")
      .where({ owner_id: ownerId })
      .whereIn("serial", [...bySerial.keys()])
      .select("serial");
    for (const { serial } of existing as Array<{ serial: string }>)
      problems.push({ line: bySerial.get(serial)!, column: "serial", value: serial, message: serialTaken(serial) });
  }
  if (problems.length > 0) return { ok: false, rowsRead: rows.length, problems: sortProblems(problems) };

  try {
    return await conn.transaction(async (trx) => {
      const batch = valid.map((v) => couponRow(ownerId, v.coupon));
      const inserted: Array<{ id: string; serial: string }> = [];
      for (let i = 0; i < batch.length; i += 500)
        inserted.push(
          ...(await trx("coupons")
            .insert(batch.slice(i, i + 500))
            .returning(["id", "serial"])),
        );
      const idBySerial = new Map(inserted.map((r) => [r.serial, r.id]));
      for (const row of batch)
        await recordAudit(trx, {
          ownerId,
          actor,
          action: "coupon.created",
          recordType: "coupon",
          recordId: idBySerial.get(row.serial)!,
          after: couponAuditSnapshot(row),
          reason: `CSV import of ${batch.length} coupon${batch.length === 1 ? "" : "s"}`,
          requestId,
        });
      return { ok: true as const, count: batch.length, serials: batch.map((b) => b.serial) };
    });
  } catch (error) {
    // Someone added one of these serials between the check and the insert.
    if (uniqueViolation(error) === "coupons_owner_serial_key") {
      const serial = /\(owner_id, serial\)=\([^,]+, (.+)\)/.exec((error as PgError).detail ?? "")?.[1];
      const line = serial ? bySerial.get(serial) : undefined;
      return {
        ok: false,
        rowsRead: rows.length,
        problems: [
          {
            line: line ?? 1,
            column: "serial",
            value: serial,
            message: serial ? serialTaken(serial) : "A serial in the file is already in your coupon stock.",
          },
        ],
      };
    }
    throw error;
  }
}

// ── Owner settings: severity thresholds and minimum exposure ───────────────────

export const DEFAULT_MINIMUM_EXPOSURE_DAYS = 30;
const threshold = (what: string) => optionalDecimal({ what, unit: "mm/y", gt: 0, max: 9999, decimals: 4 });
const KIND_WORDS = { general: "general", pitting: "pitting" } as const;

export const settingsSchema = z
  .object({
    general_moderate: threshold("moderate-from"),
    general_high: threshold("high-from"),
    general_severe: threshold("severe-above"),
    pitting_moderate: threshold("moderate-from"),
    pitting_high: threshold("high-from"),
    pitting_severe: threshold("severe-above"),
    minimum_exposure_days: wholeNumber("the minimum exposure", "days", 1, 365, DEFAULT_MINIMUM_EXPOSURE_DAYS),
  })
  .transform((v, ctx) => {
    const bands = {} as Record<"general" | "pitting", SeverityThresholds | null>;
    for (const kind of ["general", "pitting"] as const) {
      const t = { moderate: v[`${kind}_moderate`], high: v[`${kind}_high`], severe: v[`${kind}_severe`] };
      const given = Object.values(t).filter((x) => x !== undefined).length;
      if (given === 0) {
        bands[kind] = null;
        continue;
      }
      if (given < 3) {
        for (const level of ["moderate", "high", "severe"] as const)
          if (t[level] === undefined)
            ctx.addIssue({
              code: "custom",
              path: [`${kind}_${level}`],
              message: `Fill in all three ${KIND_WORDS[kind]} thresholds, or leave all three empty for the SP0775 defaults.`,
            });
        bands[kind] = null;
        continue;
      }
      try {
        bands[kind] = validateThresholds(t);
      } catch (error) {
        const level = /^thresholds\.(\w+)/.exec((error as Error).message)?.[1] ?? "high";
        const message =
          level === "severe"
            ? `Severe-above must be at least high-from (${t.high} mm/y).`
            : `High-from must be greater than moderate-from (${t.moderate} mm/y).`;
        ctx.addIssue({ code: "custom", path: [`${kind}_${level}`], message });
        bands[kind] = null;
      }
    }
    return { general: bands.general, pitting: bands.pitting, minimumExposureDays: v.minimum_exposure_days };
  });

/** What the calculation code needs: thresholds in mm/y (undefined = SP0775 defaults) and the minimum exposure. */
export type OwnerSettings = {
  generalThresholds?: SeverityThresholds;
  pittingThresholds?: SeverityThresholds;
  minimumExposureDays: number;
};

function settingsFromRow(row: Record<string, any> | undefined): OwnerSettings {
  const band = (kind: "general" | "pitting"): SeverityThresholds | undefined =>
    row && row[`${kind}_moderate_mm_y`] !== null && row[`${kind}_moderate_mm_y`] !== undefined
      ? {
          moderate: Number(row[`${kind}_moderate_mm_y`]),
          high: Number(row[`${kind}_high_mm_y`]),
          severe: Number(row[`${kind}_severe_mm_y`]),
        }
      : undefined;
  const settings: OwnerSettings = {
    minimumExposureDays: row ? Number(row.minimum_exposure_days) : DEFAULT_MINIMUM_EXPOSURE_DAYS,
  };
  const general = band("general");
  const pitting = band("pitting");
  if (general) settings.generalThresholds = general;
  if (pitting) settings.pittingThresholds = pitting;
  return settings;
}

const settingsColumns = [
  "general_moderate_mm_y",
  "general_high_mm_y",
  "general_severe_mm_y",
  "pitting_moderate_mm_y",
  "pitting_high_mm_y",
  "pitting_severe_mm_y",
  "minimum_exposure_days",
];

/** The owner's thresholds and minimum exposure; defaults when nothing is stored. */
export async function ownerSettings(conn: Db, ownerId: string): Promise<OwnerSettings> {
  const row = await conn("owner_settings").where({ owner_id: ownerId }).first(settingsColumns);
  return settingsFromRow(row);
}

/** Stores the owner's settings (insert or update in one statement) with an audit event. */
export async function saveOwnerSettings(
  conn: Db,
  ownerId: string,
  actor: Actor,
  input: FormInput,
  requestId?: string | null,
): Promise<WriteResult<{ settings: OwnerSettings; changed: boolean }>> {
  const parsed = settingsSchema.safeParse(input);
  if (!parsed.success) return { ok: false, errors: fieldErrorsOf(parsed.error) };
  const { general, pitting, minimumExposureDays } = parsed.data;
  const values = {
    general_moderate_mm_y: general?.moderate ?? null,
    general_high_mm_y: general?.high ?? null,
    general_severe_mm_y: general?.severe ?? null,
    pitting_moderate_mm_y: pitting?.moderate ?? null,
    pitting_high_mm_y: pitting?.high ?? null,
    pitting_severe_mm_y: pitting?.severe ?? null,
    minimum_exposure_days: minimumExposureDays,
  };
  return conn.transaction(async (trx) => {
    const beforeRow = await trx("owner_settings").where({ owner_id: ownerId }).forUpdate().first(settingsColumns);
    const before = settingsFromRow(beforeRow);
    const [afterRow] = await trx("owner_settings")
      .insert({ owner_id: ownerId, ...values })
      .onConflict("owner_id")
      .merge({ ...values, updated_at: trx.fn.now() })
      .returning(settingsColumns);
    const after = settingsFromRow(afterRow);
    const changed = JSON.stringify(before) !== JSON.stringify(after);
    if (changed)
      await recordAudit(trx, {
        ownerId,
        actor,
        action: "owner_settings.updated",
        recordType: "owner_settings",
        recordId: ownerId,
        before: beforeRow ? before : null,
        after,
        requestId,
      });
    return { ok: true as const, settings: after, changed };
  });
}
