import { cmlSchema, cmlValuesOf, lifeMoves, type CmlSnapshot } from "./cmls.server";
import {
  DESIGN_COLUMNS,
  circuitSnapshot,
  fromForm,
  parseCircuit,
  type CircuitSnapshot,
  type StoredDesign,
} from "./circuits.server";
import {
  CSV_MAX_BYTES,
  readCsvTable,
  sortProblems,
  type CsvColumnSpec,
  type CsvProblem,
  type CsvRefusal,
} from "./coupon-import.server";
import type { Db } from "../services/db.server";
import { toCsv } from "../services/csv";
import { Invalid, NotFoundInTenant, refusedFile } from "../services/outcome";
import { isUuid } from "../services/ids";
import { auditedWrite, changedKeys, recordAudits, type Actor, type AuditInput } from "./audit.server";

/**
 * CSV imports of a site's set-up: circuit design data (a line per circuit, by tag; a new tag
 * adds the circuit to the unit named) and CMLs (a line per CML, by its tag). Both are all or
 * nothing: every line is checked with the same rules as the forms before anything is written,
 * problems are listed by line and column, and a file imported again changes nothing. Reads
 * and writes are set-wise (a handful of queries whatever the number of lines); the audit
 * events — one per circuit or CML the import changed, in its own trail, and one for the import
 * itself on the site's — go in one statement.
 */

export type SiteImportResult = { created: string[]; updated: string[]; unchanged: number };

/** The circuit design columns: our own names, units in the names, matching the form's fields. */
export const DESIGN_CSV_COLUMNS: ReadonlyArray<CsvColumnSpec & { what: string }> = [
  { name: "circuit_tag", required: true, what: "Circuit tag (unique within the site); a new tag adds the circuit" },
  { name: "unit_tag", required: true, what: "The process unit's tag at this site" },
  { name: "material", what: "Material key, e.g. carbon-steel; needed for a new circuit, empty keeps it" },
  { name: "nps", what: "Nominal pipe size, e.g. 6 or 2-1/2" },
  { name: "schedule", what: "Schedule, e.g. 40, XS, 80S" },
  { name: "outside_diameter_mm", what: "Outside diameter, mm; empty: from the NPS (ASME B36.10M)" },
  { name: "nominal_wall_mm", what: "Nominal wall, mm; empty: from NPS and schedule" },
  { name: "mill_tolerance_pct", what: "Mill under-tolerance, %; empty: 12.5" },
  { name: "design_pressure_mpa", what: "Design pressure, MPa (gauge)" },
  { name: "design_temperature_c", what: "Design temperature, °C" },
  { name: "allowable_stress_mpa", what: "Allowable stress S at the design temperature, MPa" },
  { name: "joint_factor_e", what: "Joint quality factor E" },
  { name: "weld_factor_w", what: "Weld strength reduction factor W; empty: 1" },
  { name: "y_coefficient", what: "Coefficient Y; empty: B31.3 Table 304.1.1 by material" },
  { name: "corrosion_allowance_mm", what: "Corrosion allowance, mm (shown beside, not added)" },
  { name: "structural_minimum_mm", what: "The owner's structural minimum, mm; empty: API 574 by NPS" },
  { name: "structural_minimum_reason", what: "Why the owner's minimum is used (needed with it)" },
  { name: "piping_class", what: "API 570 piping class 1 to 4" },
];

/** The CML columns. */
export const CML_CSV_COLUMNS: ReadonlyArray<CsvColumnSpec & { what: string }> = [
  { name: "circuit_tag", required: true, what: "The circuit's tag at this site" },
  { name: "cml_tag", required: true, what: "CML tag, unique across your sites; an existing tag is updated" },
  { name: "location", what: "Where on the circuit, in words" },
  { name: "component", required: true, what: "pipe, elbow, tee, reducer, cap, nozzle, flange, valve or other" },
  { name: "injection_point", what: "yes or no (empty: no)" },
  { name: "baseline_mm", what: "Base-line thickness, mm; empty: nominal wall less mill tolerance" },
  { name: "baseline_date", what: "Date of the base-line, YYYY-MM-DD" },
];

const designOrder = DESIGN_CSV_COLUMNS.map((c) => c.name);
const cmlOrder = CML_CSV_COLUMNS.map((c) => c.name);

export function designCsvTemplate(): string {
  const header = DESIGN_CSV_COLUMNS.map((c) => c.name);
  const line = (v: Record<string, string>) => header.map((h) => v[h] ?? "");
  return toCsv(header, [
    line({
      circuit_tag: "CDU-OVHD-01",
      unit_tag: "U-100",
      material: "carbon-steel",
      nps: "6",
      schedule: "40",
      design_pressure_mpa: "0.35",
      design_temperature_c: "150",
      allowable_stress_mpa: "138",
      joint_factor_e: "1",
      corrosion_allowance_mm: "3",
      piping_class: "2",
    }),
    line({
      circuit_tag: "SWS-BTMS-01",
      unit_tag: "U-310",
      material: "carbon-steel",
      nps: "2",
      schedule: "80",
      outside_diameter_mm: "60.3",
      nominal_wall_mm: "5.54",
      mill_tolerance_pct: "12.5",
      design_pressure_mpa: "0.8",
      design_temperature_c: "130",
      allowable_stress_mpa: "138",
      joint_factor_e: "0.85",
      structural_minimum_mm: "2.5",
      structural_minimum_reason: "Site minimum for small-bore lines",
      piping_class: "3",
    }),
  ]);
}

export function cmlCsvTemplate(): string {
  const header = CML_CSV_COLUMNS.map((c) => c.name);
  const line = (v: Record<string, string>) => header.map((h) => v[h] ?? "");
  return toCsv(header, [
    line({
      circuit_tag: "CDU-OVHD-01",
      cml_tag: "OVHD-01-E02",
      location: "first elbow, outer radius",
      component: "elbow",
      injection_point: "no",
      baseline_mm: "7.02",
      baseline_date: "2018-05-14",
    }),
    line({
      circuit_tag: "CDU-OVHD-01",
      cml_tag: "OVHD-01-N03",
      location: "downstream of the injection quill",
      component: "nozzle",
      injection_point: "yes",
    }),
  ]);
}

const tooLarge = (text: string): CsvRefusal | null =>
  text.length > CSV_MAX_BYTES
    ? {
        rowsRead: 0,
        problems: [
          { line: 1, column: null, message: `The file is larger than ${CSV_MAX_BYTES / 1_000_000} MB; split it.` },
        ],
      }
    : null;

/** The site, if it is the owner's, with its calendar day. */
async function ownSite(conn: Db, ownerId: string, siteId: string) {
  if (!isUuid(siteId)) throw new NotFoundInTenant("site");
  const site: { id: string; today: string } | undefined = await conn("sites")
    .where({ id: siteId, owner_id: ownerId })
    .first("id", conn.raw("site_today(id)::text as today"));
  if (!site) throw new NotFoundInTenant("site");
  return site;
}

/** A typed recordset column list for `jsonb_to_recordset`, from a column → SQL type map. */
const recordsetColumns = (types: Record<string, string>) =>
  Object.entries(types)
    .map(([k, t]) => `${k} ${t}`)
    .join(", ");

const CIRCUIT_TYPES: Record<string, string> = {
  id: "uuid",
  unit_id: "uuid",
  tag: "text",
  description: "text",
  material_code: "text",
  service: "text",
  nps: "text",
  schedule: "text",
  outside_diameter_mm: "numeric",
  nominal_wall_mm: "numeric",
  mill_tolerance_pct: "numeric",
  design_pressure_mpa: "numeric",
  design_temperature_c: "numeric",
  allowable_stress_mpa: "numeric",
  joint_factor_e: "numeric",
  weld_factor_w: "numeric",
  y_coefficient: "numeric",
  corrosion_allowance_mm: "numeric",
  structural_minimum_mm: "numeric",
  structural_minimum_reason: "text",
  piping_class: "smallint",
  outside_diameter_from_table: "boolean",
  nominal_wall_from_table: "boolean",
};

/** The circuit form's field → the import's column. */
const designColumnOf = (field: string) =>
  field === "tag" ? "circuit_tag" : field === "unit_id" ? "unit_tag" : field === "form" ? null : field;

type StoredCircuit = Omit<CircuitSnapshot, keyof StoredDesign> & StoredDesign & { id: string };

/** Imports circuit design data for one of the owner's sites, all or nothing. */
export async function importCircuitDesign(
  conn: Db,
  ownerId: string,
  actor: Actor,
  siteId: string,
  text: string,
  requestId?: string | null,
): Promise<SiteImportResult> {
  await ownSite(conn, ownerId, siteId);
  const big = tooLarge(text);
  if (big) throw refusedFile(big);
  const { rows, problems } = readCsvTable(text, DESIGN_CSV_COLUMNS, "circuits");
  if (problems.length > 0 && rows.length === 0) throw refusedFile({ rowsRead: 0, problems });

  const [units, existing]: [Array<{ id: string; tag: string }>, StoredCircuit[]] = await Promise.all([
    conn("process_units as u")
      .join("sites as s", "s.id", "u.site_id")
      .where({ "u.site_id": siteId, "s.owner_id": ownerId })
      .select("u.id", "u.tag"),
    conn("circuits as c")
      .join("sites as s", "s.id", "c.site_id")
      .where({ "c.site_id": siteId, "s.owner_id": ownerId })
      .select(
        "c.id",
        "c.unit_id",
        "c.tag",
        "c.description",
        "c.material_code",
        "c.service",
        ...DESIGN_COLUMNS.map((k) => `c.${k}`),
      ),
  ]);
  const unitByTag = new Map(units.map((u) => [u.tag, u]));
  const unitTagOf = new Map(units.map((u) => [u.id, u.tag]));
  const circuitByTag = new Map(existing.map((c) => [c.tag, c]));

  const seen = new Map<string, number>();
  const creates: Array<{ line: number; row: CircuitSnapshot }> = [];
  const updates: Array<{ line: number; id: string; before: CircuitSnapshot; after: CircuitSnapshot }> = [];
  let unchanged = 0;
  for (const { line, values } of rows) {
    const tag = values.circuit_tag.trim();
    const unitTag = values.unit_tag.trim();
    const stored = circuitByTag.get(tag);
    const unit = unitByTag.get(unitTag);
    const fail = (column: string | null, message: string) =>
      problems.push({ line, column, value: column ? values[column] : undefined, message });
    if (tag && seen.has(tag))
      fail("circuit_tag", `The circuit ${tag} is already on line ${seen.get(tag)} of this file.`);
    else if (tag) seen.set(tag, line);
    if (unitTag === "") fail("unit_tag", "Give the process unit's tag.");
    else if (!unit) fail("unit_tag", `This site has no process unit tagged ${unitTag}; add it on the site page first.`);
    else if (stored && stored.unit_id !== unit.id)
      fail(
        "unit_tag",
        `Circuit ${tag} is in unit ${unitTagOf.get(stored.unit_id) ?? "another unit"}; move it on the site page, not by import.`,
      );
    const material = values.material?.trim() || stored?.material_code || "";
    if (!stored && material === "") fail("material", `A new circuit (${tag}) needs its material.`);
    const input: Record<string, string> = {
      unit_id: unit?.id ?? stored?.unit_id ?? "00000000-0000-4000-8000-000000000000",
      tag,
      material,
      description: stored?.description ?? "",
      service: stored?.service ?? "",
    };
    for (const c of DESIGN_CSV_COLUMNS)
      if (c.name !== "circuit_tag" && c.name !== "unit_tag" && c.name !== "material")
        input[c.name] = values[c.name] ?? "";
    let parsed: ReturnType<typeof parseCircuit> | null = null;
    try {
      parsed = parseCircuit(input);
    } catch (error) {
      if (!(error instanceof Invalid)) throw error;
      for (const [field, message] of Object.entries(error.fieldErrors))
        if (message && !(field === "material" && material === "")) fail(designColumnOf(field), message);
    }
    if (!parsed || !unit || problems.some((p) => p.line === line)) continue;
    const after = fromForm(parsed);
    if (!stored) creates.push({ line, row: after });
    else {
      const before = circuitSnapshot(stored);
      if (changedKeys(before, after).length === 0) unchanged += 1;
      else updates.push({ line, id: stored.id, before, after });
    }
  }
  if (problems.length > 0) throw refusedFile({ rowsRead: rows.length, problems: sortProblems(problems, designOrder) });
  if (creates.length === 0 && updates.length === 0) return { created: [], updated: [], unchanged };

  const reason = `CSV import: ${creates.length} circuit(s) added, ${updates.length} changed`;
  return auditedWrite(conn, { ownerId, actor, requestId }, async ({ trx }) => {
    const events: AuditInput[] = [];
    if (creates.length > 0) {
      const inserted: Array<{ id: string; tag: string }> = await trx("circuits")
        .insert(creates.map((c) => ({ ...c.row, site_id: siteId })))
        .returning(["id", "tag"]);
      const idOf = new Map(inserted.map((r) => [r.tag, r.id]));
      for (const c of creates)
        events.push({
          ownerId,
          actor,
          requestId,
          action: "circuit.created",
          recordType: "circuit",
          recordId: idOf.get(c.row.tag)!,
          after: { site_id: siteId, ...c.row },
          reason,
        });
    }
    if (updates.length > 0) {
      const columns = Object.keys(CIRCUIT_TYPES).filter((k) => k !== "id");
      await trx.raw(
        `update circuits c set ${columns.map((k) => `${k} = x.${k}`).join(", ")}, updated_at = now()
           from jsonb_to_recordset(?::jsonb) as x(${recordsetColumns(CIRCUIT_TYPES)})
          where c.id = x.id and c.site_id = ?`,
        [JSON.stringify(updates.map((u) => ({ id: u.id, ...u.after }))), siteId],
      );
      for (const u of updates)
        events.push({
          ownerId,
          actor,
          requestId,
          action: "circuit.updated",
          recordType: "circuit",
          recordId: u.id,
          before: u.before,
          after: u.after,
          reason,
        });
    }
    const result = { created: creates.map((c) => c.row.tag), updated: updates.map((u) => u.after.tag), unchanged };
    if (creates.length + updates.length > 0)
      await lifeMoves(
        trx,
        ownerId,
        actor,
        `Circuit design data imported from a file (${creates.length + updates.length} circuits).`,
      );
    events.push({
      ownerId,
      actor,
      requestId,
      action: "circuit.design_imported",
      recordType: "site",
      recordId: siteId,
      after: result,
      reason,
    });
    await recordAudits(trx, events);
    return result;
  });
}

const CML_TYPES: Record<string, string> = {
  id: "uuid",
  tag: "text",
  location: "text",
  component: "text",
  injection_point: "boolean",
  baseline_thickness_mm: "numeric",
  baseline_on: "date",
};

const cmlColumnOf: Record<string, string> = {
  tag: "cml_tag",
  location: "location",
  component: "component",
  injection_point: "injection_point",
  baseline_thickness_mm: "baseline_mm",
  baseline_on: "baseline_date",
};

const yesNo = (raw: string): "on" | "off" | null => {
  const v = raw.trim().toLowerCase();
  if (v === "" || v === "no" || v === "n" || v === "false") return "off";
  if (v === "yes" || v === "y" || v === "true") return "on";
  return null;
};

type StoredCmlRow = CmlSnapshot & {
  id: string;
  circuit_id: string;
  site_id: string;
  baseline_thickness_mm: number | null;
};

/** Imports CMLs for one of the owner's sites, all or nothing; a CML is found by its tag. */
export async function importCmls(
  conn: Db,
  ownerId: string,
  actor: Actor,
  siteId: string,
  text: string,
  requestId?: string | null,
): Promise<SiteImportResult> {
  const site = await ownSite(conn, ownerId, siteId);
  const big = tooLarge(text);
  if (big) throw refusedFile(big);
  const { rows, problems } = readCsvTable(text, CML_CSV_COLUMNS, "CMLs");
  if (problems.length > 0 && rows.length === 0) throw refusedFile({ rowsRead: 0, problems });

  const tags = [...new Set(rows.map((r) => r.values.cml_tag.trim()).filter(Boolean))];
  const [circuits, existingRaw]: [Array<{ id: string; tag: string }>, Array<Record<string, unknown>>] =
    await Promise.all([
      conn("circuits as c")
        .join("sites as s", "s.id", "c.site_id")
        .where({ "c.site_id": siteId, "s.owner_id": ownerId })
        .select("c.id", "c.tag"),
      conn("cmls as m")
        .join("circuits as c", "c.id", "m.circuit_id")
        .where({ "m.owner_id": ownerId })
        .whereIn("m.tag", tags)
        .select(
          "m.id",
          "m.circuit_id",
          "c.site_id",
          "m.tag",
          "m.location",
          "m.component",
          "m.injection_point",
          "m.baseline_thickness_mm",
          conn.raw("m.baseline_on::text as baseline_on"),
        ),
    ]);
  const existing: StoredCmlRow[] = existingRaw.map((r) => ({
    id: r.id as string,
    circuit_id: r.circuit_id as string,
    site_id: r.site_id as string,
    tag: r.tag as string,
    location: r.location as string,
    component: r.component as string,
    injection_point: r.injection_point as boolean,
    baseline_thickness_mm: r.baseline_thickness_mm === null ? null : Number(r.baseline_thickness_mm),
    baseline_on: (r.baseline_on as string | null) ?? null,
  }));
  const circuitByTag = new Map(circuits.map((c) => [c.tag, c]));
  const circuitTagOf = new Map(circuits.map((c) => [c.id, c.tag]));
  const cmlByTag = new Map(existing.map((m) => [m.tag, m]));

  const seen = new Map<string, number>();
  const creates: Array<{ circuitId: string; row: CmlSnapshot }> = [];
  const updates: Array<{ id: string; before: CmlSnapshot; after: CmlSnapshot }> = [];
  let unchanged = 0;
  for (const { line, values } of rows) {
    const fail = (column: string, message: string) => problems.push({ line, column, value: values[column], message });
    const circuitTag = values.circuit_tag.trim();
    const tag = values.cml_tag.trim();
    const circuit = circuitByTag.get(circuitTag);
    const stored = cmlByTag.get(tag);
    if (tag && seen.has(tag)) fail("cml_tag", `The CML ${tag} is already on line ${seen.get(tag)} of this file.`);
    else if (tag) seen.set(tag, line);
    if (!circuit)
      fail(
        "circuit_tag",
        circuitTag ? `This site has no circuit tagged ${circuitTag}.` : "Give the circuit's tag at this site.",
      );
    if (stored && stored.site_id !== siteId)
      fail("cml_tag", `The CML tag ${tag} is already used at another of your sites; CML tags are unique across them.`);
    else if (stored && circuit && stored.circuit_id !== circuit.id)
      fail(
        "cml_tag",
        `CML ${tag} is on circuit ${circuitTagOf.get(stored.circuit_id) ?? "another circuit"}; a CML is not moved by import.`,
      );
    const injection = yesNo(values.injection_point ?? "");
    if (injection === null) fail("injection_point", "Write yes or no (or leave it empty for no).");
    const parsed = cmlSchema.safeParse({
      tag,
      location: values.location ?? "",
      component: (values.component ?? "").trim().toLowerCase(),
      injection_point: injection ?? "off",
      baseline_thickness_mm: values.baseline_mm ?? "",
      baseline_on: values.baseline_date ?? "",
    });
    if (!parsed.success) {
      const first = new Set<string>();
      for (const issue of parsed.error.issues) {
        const field = String(issue.path[0] ?? "");
        if (first.has(field)) continue;
        first.add(field);
        fail(cmlColumnOf[field] ?? "cml_tag", issue.message);
      }
      continue;
    }
    const after = cmlValuesOf(parsed.data);
    if (after.baseline_on !== null && after.baseline_on > site.today)
      fail("baseline_date", `The base-line date ${after.baseline_on} is after today (${site.today}) at the site.`);
    if (!circuit || problems.some((p) => p.line === line)) continue;
    if (!stored) creates.push({ circuitId: circuit.id, row: after });
    else {
      const { id: _id, circuit_id: _c, site_id: _s, ...before } = stored;
      if (changedKeys(before, after).length === 0) unchanged += 1;
      else updates.push({ id: stored.id, before, after });
    }
  }
  if (problems.length > 0) throw refusedFile({ rowsRead: rows.length, problems: sortProblems(problems, cmlOrder) });
  if (creates.length === 0 && updates.length === 0) return { created: [], updated: [], unchanged };

  const reason = `CSV import: ${creates.length} CML(s) added, ${updates.length} changed`;
  return auditedWrite(
    conn,
    { ownerId, actor, requestId },
    async ({ trx }) => {
      const events: AuditInput[] = [];
      if (creates.length > 0) {
        const inserted: Array<{ id: string; tag: string }> = await trx("cmls")
          .insert(creates.map((c) => ({ ...c.row, owner_id: ownerId, circuit_id: c.circuitId })))
          .returning(["id", "tag"]);
        const idOf = new Map(inserted.map((r) => [r.tag, r.id]));
        for (const c of creates)
          events.push({
            ownerId,
            actor,
            requestId,
            action: "cml.created",
            recordType: "cml",
            recordId: idOf.get(c.row.tag)!,
            after: { circuit_id: c.circuitId, ...c.row },
            reason,
          });
      }
      if (updates.length > 0) {
        const columns = Object.keys(CML_TYPES).filter((k) => k !== "id");
        await trx.raw(
          `update cmls m set ${columns.map((k) => `${k} = x.${k}`).join(", ")}, updated_at = now()
           from jsonb_to_recordset(?::jsonb) as x(${recordsetColumns(CML_TYPES)})
          where m.id = x.id and m.owner_id = ?`,
          [JSON.stringify(updates.map((u) => ({ id: u.id, ...u.after }))), ownerId],
        );
        for (const u of updates)
          events.push({
            ownerId,
            actor,
            requestId,
            action: "cml.updated",
            recordType: "cml",
            recordId: u.id,
            before: u.before,
            after: u.after,
            reason,
          });
      }
      const result = { created: creates.map((c) => c.row.tag), updated: updates.map((u) => u.after.tag), unchanged };
      if (updates.length > 0)
        await lifeMoves(trx, ownerId, actor, `CMLs imported from a file (${updates.length} changed).`);
      events.push({
        ownerId,
        actor,
        requestId,
        action: "cml.imported",
        recordType: "site",
        recordId: siteId,
        after: result,
        reason,
      });
      await recordAudits(trx, events);
      return result;
    },
    {
      cmls_owner_tag_key: { file: "A CML tag in the file was taken by someone else meanwhile; import the file again." },
    },
  );
}

export type { CsvProblem };
