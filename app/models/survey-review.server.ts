import type { Knex } from "knex";
import { thicknessRates } from "../domain/index.ts";
import type { Db } from "../services/db.server";
import { cleanFileName } from "../services/file-names";
import { materialName } from "../services/coupon-spec";
import { listCircuits, type RequiredThicknessView } from "./circuits.server";

/**
 * The owner's review of a thickness survey: its readings with their CMLs, the circuits it
 * covers with their required thickness, each CML's approved history (base-line and
 * component replacements included), the change since the last reading and its rate, and
 * the survey's files. Every read is scoped to the owner in SQL.
 */

export type StoredFlag = { code: string; severity: "warning" | "info"; message: string };

export type SurveyReading = {
  id: string;
  cmlId: string;
  cmlTag: string;
  location: string;
  component: string;
  injectionPoint: boolean;
  circuitId: string;
  circuitTag: string;
  /** The site's calendar day, YYYY-MM-DD. */
  measuredOn: string;
  thicknessMm: number;
  quadrantReadingsMm: number[];
  method: string;
  instrument: string;
  instrumentResolutionMm: number | null;
  technician: string;
  notes: string;
  flags: StoredFlag[];
};

const num = (v: string | number) => Number(v);
const numOrNull = (v: string | number | null) => (v === null ? null : Number(v));

/** The readings of one survey (already scoped by the caller's read of the submission), by CML tag. */
export async function surveyReadings(conn: Db, submissionId: string): Promise<SurveyReading[]> {
  const rows: Array<{
    id: string;
    cml_id: string;
    tag: string;
    location: string;
    component: string;
    injection_point: boolean;
    circuit_id: string;
    circuit_tag: string;
    measured_on: string;
    thickness_mm: string;
    quadrant_readings_mm: Array<string | number>;
    method: string;
    instrument: string;
    instrument_resolution_mm: string | null;
    technician: string;
    notes: string;
    flags: StoredFlag[];
  }> = await conn("thickness_readings as r")
    .join("cmls as m", "m.id", "r.cml_id")
    .join("circuits as ci", "ci.id", "m.circuit_id")
    .where("r.submission_id", submissionId)
    .orderBy([{ column: "m.tag" }, { column: "r.id" }])
    .select(
      "r.id",
      "r.cml_id",
      "m.tag",
      "m.location",
      "m.component",
      "m.injection_point",
      "m.circuit_id",
      "ci.tag as circuit_tag",
      conn.raw("to_char(r.measured_on, 'YYYY-MM-DD') as measured_on"),
      "r.thickness_mm",
      "r.quadrant_readings_mm",
      "r.method",
      "r.instrument",
      "r.instrument_resolution_mm",
      "r.technician",
      "r.notes",
      "r.flags",
    );
  return rows.map((r) => ({
    id: r.id,
    cmlId: r.cml_id,
    cmlTag: r.tag,
    location: r.location,
    component: r.component,
    injectionPoint: r.injection_point,
    circuitId: r.circuit_id,
    circuitTag: r.circuit_tag,
    measuredOn: r.measured_on,
    thicknessMm: num(r.thickness_mm),
    quadrantReadingsMm: (r.quadrant_readings_mm ?? []).map(num),
    method: r.method,
    instrument: r.instrument,
    instrumentResolutionMm: numOrNull(r.instrument_resolution_mm),
    technician: r.technician,
    notes: r.notes,
    flags: r.flags ?? [],
  }));
}

/** The circuits a survey covers. */
export async function surveyCircuitIds(conn: Db, submissionId: string): Promise<string[]> {
  const rows: Array<{ circuit_id: string }> = await conn("survey_circuits")
    .where({ submission_id: submissionId })
    .select("circuit_id");
  return rows.map((r) => r.circuit_id);
}

export type SurveyCircuit = {
  id: string;
  tag: string;
  service: string;
  materialName: string;
  pipingClass: number | null;
  nominalWallMm: number | null;
  requiredThickness: RequiredThicknessView;
};

/** The circuits of the survey with their required thickness and what governed it (computed on display). */
export async function surveyCircuits(
  conn: Db,
  ownerId: string,
  siteId: string,
  submissionId: string,
): Promise<SurveyCircuit[]> {
  const ids = new Set(await surveyCircuitIds(conn, submissionId));
  const circuits = await listCircuits(conn, ownerId, siteId);
  return circuits
    .filter((c) => ids.has(c.id))
    .map((c) => ({
      id: c.id,
      tag: c.tag,
      service: c.service,
      materialName: materialName(c.material_code),
      pipingClass: c.piping_class,
      nominalWallMm: c.nominal_wall_mm,
      requiredThickness: c.requiredThickness,
    }));
}

export type CmlHistory = {
  cmlId: string;
  baseline: { on: string | null; thicknessMm: number | null };
  /** Approved readings of other surveys, oldest first. */
  readings: Array<{ measuredOn: string; thicknessMm: number; reference: string }>;
  replacements: Array<{ replacedOn: string; baselineThicknessMm: number | null; reason: string }>;
};

/**
 * The approved history of these CMLs as the owner holds it: approved readings of other
 * surveys (not this one, nor the survey a correction replaces), the base-line and the
 * component replacements.
 */
export async function cmlHistories(
  conn: Db,
  ownerId: string,
  cmlIds: string[],
  submissionId: string,
): Promise<Map<string, CmlHistory>> {
  const out = new Map<string, CmlHistory>();
  if (cmlIds.length === 0) return out;
  const cmls: Array<{ id: string; baseline_thickness_mm: string | null; baseline_on: string | null }> = await conn(
    "cmls",
  )
    .where("owner_id", ownerId)
    .whereIn("id", cmlIds)
    .select("id", "baseline_thickness_mm", conn.raw("to_char(baseline_on, 'YYYY-MM-DD') as baseline_on"));
  for (const c of cmls)
    out.set(c.id, {
      cmlId: c.id,
      baseline: { on: c.baseline_on, thicknessMm: numOrNull(c.baseline_thickness_mm) },
      readings: [],
      replacements: [],
    });
  const { rows } = await conn.raw<{
    rows: Array<{ cml_id: string; measured_on: string; thickness_mm: string; reference: string }>;
  }>(
    `select r.cml_id, to_char(r.measured_on, 'YYYY-MM-DD') as measured_on, r.thickness_mm, s.reference
       from thickness_readings r
       join submissions s on s.id = r.submission_id and s.status = 'approved' and s.owner_id = ?
      where r.cml_id = any(?::uuid[])
        and s.id <> ?
        and s.id is distinct from (select supersedes_id from submissions where id = ?)
      order by r.cml_id, r.measured_on`,
    [ownerId, cmlIds, submissionId, submissionId],
  );
  for (const r of rows)
    out
      .get(r.cml_id)
      ?.readings.push({ measuredOn: r.measured_on, thicknessMm: num(r.thickness_mm), reference: r.reference });
  const replaced: Array<{
    cml_id: string;
    replaced_on: string;
    baseline_thickness_mm: string | null;
    reason: string;
  }> = await conn("cml_replacements as x")
    .join("cmls as m", "m.id", "x.cml_id")
    .where("m.owner_id", ownerId)
    .whereIn("x.cml_id", cmlIds)
    .orderBy("x.replaced_on")
    .select(
      "x.cml_id",
      conn.raw("to_char(x.replaced_on, 'YYYY-MM-DD') as replaced_on"),
      "x.baseline_thickness_mm",
      "x.reason",
    );
  for (const x of replaced)
    out.get(x.cml_id)?.replacements.push({
      replacedOn: x.replaced_on,
      baselineThicknessMm: numOrNull(x.baseline_thickness_mm),
      reason: x.reason,
    });
  return out;
}

export type ChangeSinceLast = {
  /** What this reading is compared with: the last approved reading, or the base-line. */
  from: { on: string; thicknessMm: number; what: "reading" | "base-line" | "replacement" };
  /** This reading less the earlier one, mm (negative: wall lost). */
  changeMm: number;
  years: number;
  /** The implied rate over the span, mm/y, never negative (API 570 short-term rate). */
  rateMmPerYear: number;
  grew: boolean;
};

const DAY_MS = 86_400_000;

/**
 * The change of one reading since the CML's last approved reading before it (or its
 * base-line), and the rate over that span. A component replacement starts a new history:
 * no span crosses it. Null when there is nothing earlier to compare with.
 */
export function changeSinceLast(
  reading: Pick<SurveyReading, "measuredOn" | "thicknessMm">,
  history: CmlHistory | undefined,
): ChangeSinceLast | null {
  if (!history) return null;
  const replacement = [...history.replacements].reverse().find((x) => x.replacedOn <= reading.measuredOn);
  const earlier = history.readings.filter(
    (r) => r.measuredOn < reading.measuredOn && (!replacement || r.measuredOn >= replacement.replacedOn),
  );
  const last = earlier[earlier.length - 1];
  let from: ChangeSinceLast["from"] | null = null;
  if (last) from = { on: last.measuredOn, thicknessMm: last.thicknessMm, what: "reading" };
  else if (replacement && replacement.baselineThicknessMm !== null && replacement.replacedOn < reading.measuredOn)
    from = { on: replacement.replacedOn, thicknessMm: replacement.baselineThicknessMm, what: "replacement" };
  else if (
    !replacement &&
    history.baseline.on &&
    history.baseline.thicknessMm !== null &&
    history.baseline.on < reading.measuredOn
  )
    from = { on: history.baseline.on, thicknessMm: history.baseline.thicknessMm, what: "base-line" };
  if (!from) return null;
  const rates = thicknessRates([
    { date: from.on, thicknessMm: from.thicknessMm },
    { date: reading.measuredOn, thicknessMm: reading.thicknessMm },
  ]);
  return {
    from,
    changeMm: Math.round((reading.thicknessMm - from.thicknessMm) * 1000) / 1000,
    years: (Date.parse(reading.measuredOn) - Date.parse(from.on)) / DAY_MS / 365.25,
    rateMmPerYear: rates.shortTermMmPerYear,
    grew: rates.grew,
  };
}

export type SurveyFileKind = "survey_sheet" | "survey_photo" | "instrument_export";

export type SurveyFile = {
  id: string;
  kind: SurveyFileKind;
  contentType: string;
  byteSize: number;
  name: string;
  url: string;
  thumbnailUrl: string | null;
  createdAt: string;
  uploadedBy: string;
};

/** The stored files of a survey: sheet, photos and the instrument's CSV export. */
export async function surveyFiles(conn: Db, ownerId: string, submissionId: string): Promise<SurveyFile[]> {
  const rows: Array<{
    id: string;
    kind: SurveyFileKind;
    content_type: string;
    byte_size: string | number;
    original_name: string;
    thumbnail_key: string | null;
    created_at: Date;
    uploaded_by_name: string;
  }> = await conn("attachments as a")
    .join("users as u", "u.id", "a.uploaded_by")
    .where({ "a.submission_id": submissionId, "a.owner_id": ownerId, "a.state": "stored" })
    .orderBy([{ column: "a.kind" }, { column: "a.created_at" }, { column: "a.id" }])
    .select(
      "a.id",
      "a.kind",
      "a.content_type",
      "a.byte_size",
      "a.original_name",
      "a.thumbnail_key",
      "a.created_at",
      "u.name as uploaded_by_name",
    );
  return rows.map((r) => ({
    id: r.id,
    kind: r.kind,
    contentType: r.content_type,
    byteSize: Number(r.byte_size),
    name: cleanFileName(r.original_name),
    url: `/attachments/${r.id}`,
    thumbnailUrl: r.thumbnail_key ? `/attachments/${r.id}/thumbnail` : null,
    createdAt: new Date(r.created_at).toISOString(),
    uploadedBy: r.uploaded_by_name,
  }));
}

/** A correction of a survey starts with the survey's circuits and readings (the readings' guard allows it: the correction is returned). */
export async function copySurveyInto(trx: Knex.Transaction, fromId: string, toId: string): Promise<void> {
  await trx.raw(
    `insert into survey_circuits (submission_id, circuit_id) select ?, circuit_id from survey_circuits where submission_id = ?`,
    [toId, fromId],
  );
  await trx.raw(
    `insert into thickness_readings (submission_id, cml_id, measured_on, thickness_mm, quadrant_readings_mm, method,
            instrument, instrument_resolution_mm, technician, notes, flags)
     select ?, cml_id, measured_on, thickness_mm, quadrant_readings_mm, method,
            instrument, instrument_resolution_mm, technician, notes, flags
       from thickness_readings where submission_id = ?`,
    [toId, fromId],
  );
}
