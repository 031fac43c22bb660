import { parse } from "csv-parse/sync";
import type { Knex } from "knex";
import type { SessionUser } from "../context";
import { surveyReadingFlags, type QualityFlag, type ThicknessReading } from "../domain/index.ts";
import type { Db } from "../services/db.server";
import { toCsv } from "../services/csv";
import { cleanFileName } from "../services/file-names";
import { isUuid } from "../services/ids";
import { Conflict, Forbidden, Invalid, NotFoundInTenant, refusedFile, type FieldErrors } from "../services/outcome";
import { can } from "../services/permissions";
import {
  emptySurveyRow,
  parseSurveyRow,
  READING_FIELDS,
  surveyRowTextOf,
  type SurveyMethod,
  type SurveyReadingValues,
  type SurveyRowText,
} from "../services/survey-spec";
import { actorOf, recordAudits, type AuditInput } from "./audit.server";
import { listCircuits, type RequiredThicknessView } from "./circuits.server";
import { coveredSiteIds } from "./contract-coverage.server";
import { nextReferences } from "./submission-references.server";
import { recordSubmittedRevision } from "./submissions.server";

/**
 * Thickness surveys, the contractor's side: an inspection contractor's technician starts a
 * survey of circuits at a site (a `submissions` row of kind 'thickness', one open draft per
 * contractor and site), enters a reading per CML in a grid or from a CSV file, and submits
 * it for review through `submitForReview`, which calls `submitSurvey` here. A contractor
 * works only where a contract in force covers the site with thickness inspection.
 */

export type SurveySite = {
  id: string;
  name: string;
  code: string;
  ownerName: string;
  circuits: Array<{ id: string; tag: string; description: string; unitTag: string; cmls: number }>;
};

function requireTechnician(user: SessionUser) {
  if (!can(user, "recordWork") || user.organisation.kind !== "contractor")
    throw new Forbidden("Only an inspection contractor's technicians record thickness surveys.");
}

/** Sites where the contractor's contracts in force cover thickness inspection. */
const surveySiteIds = (conn: Db, user: SessionUser) =>
  coveredSiteIds(conn, user.organisation.id, "thickness_inspection");

/** Whether the user's contractor has thickness inspection in force anywhere (the navigation's entry). */
export async function hasThicknessScope(conn: Db, user: SessionUser): Promise<boolean> {
  if (user.organisation.kind !== "contractor") return false;
  return Boolean(await surveySiteIds(conn, user).first());
}

/** The sites a survey can be started at, with their circuits (and how many CMLs each has). */
export async function surveySites(conn: Db, user: SessionUser): Promise<SurveySite[]> {
  requireTechnician(user);
  const rows: Array<{
    site_id: string;
    site_name: string;
    site_code: string;
    owner_name: string;
    circuit_id: string | null;
    circuit_tag: string | null;
    description: string | null;
    unit_tag: string | null;
    cmls: number | null;
  }> = await conn("sites as s")
    .join("organisations as o", "o.id", "s.owner_id")
    .leftJoin("circuits as c", "c.site_id", "s.id")
    .leftJoin("process_units as u", "u.id", "c.unit_id")
    .whereIn("s.id", surveySiteIds(conn, user))
    .orderBy([{ column: "s.name" }, { column: "c.tag" }])
    .select(
      "s.id as site_id",
      "s.name as site_name",
      "s.code as site_code",
      "o.name as owner_name",
      "c.id as circuit_id",
      "c.tag as circuit_tag",
      "c.description",
      "u.tag as unit_tag",
      conn.raw("(select count(*)::int from cmls m where m.circuit_id = c.id and m.retired_at is null) as cmls"),
    );
  const sites = new Map<string, SurveySite>();
  for (const r of rows) {
    const site = sites.get(r.site_id) ?? {
      id: r.site_id,
      name: r.site_name,
      code: r.site_code,
      ownerName: r.owner_name,
      circuits: [],
    };
    if (r.circuit_id)
      site.circuits.push({
        id: r.circuit_id,
        tag: r.circuit_tag ?? "",
        description: r.description ?? "",
        unitTag: r.unit_tag ?? "",
        cmls: r.cmls ?? 0,
      });
    sites.set(r.site_id, site);
  }
  return [...sites.values()];
}

/**
 * Starts a survey of circuits at a site, or adds the circuits to the contractor's open
 * draft survey there (one open draft per contractor, site and kind). Audited.
 */
export async function startSurvey(
  conn: Knex,
  user: SessionUser,
  input: { siteId: unknown; circuitIds: unknown[] },
  requestId?: string,
): Promise<{ submissionId: string; reference: string; created: boolean; added: number }> {
  requireTechnician(user);
  const siteId = typeof input.siteId === "string" ? input.siteId.trim().toLowerCase() : "";
  if (!isUuid(siteId)) throw new Invalid({ siteId: "Choose the site of the survey." });
  const circuitIds = [...new Set(input.circuitIds.map((c) => (typeof c === "string" ? c.trim().toLowerCase() : "")))];
  if (circuitIds.length === 0) throw new Invalid({ circuitIds: "Tick at least one circuit to survey." });
  if (circuitIds.some((c) => !isUuid(c))) throw new Invalid({ circuitIds: "Tick circuits from the list." });
  return conn.transaction(async (trx) => {
    const site: { id: string; owner_id: string; code: string } | undefined = await trx("sites")
      .where("id", siteId)
      .whereIn("id", surveySiteIds(trx, user))
      .first("id", "owner_id", "code");
    if (!site) throw new Invalid({ siteId: "Choose a site where your contract covers thickness inspection." });
    const circuits: Array<{ id: string; tag: string }> = await trx("circuits")
      .where("site_id", siteId)
      .whereIn("id", circuitIds)
      .select("id", "tag");
    if (circuits.length !== circuitIds.length)
      throw new Invalid({ circuitIds: "Tick circuits of the chosen site only." });
    const events: AuditInput[] = [];
    const find = () =>
      trx("submissions")
        .where({ contractor_id: user.organisation.id, site_id: siteId, kind: "thickness", status: "draft" })
        .forUpdate()
        .first<{ id: string; reference: string } | undefined>("id", "reference");
    let draft = await find();
    let created = false;
    if (!draft) {
      const reference = (await nextReferences(trx, [siteId])).get(siteId);
      const [row] = await trx("submissions")
        .insert({
          owner_id: site.owner_id,
          site_id: siteId,
          contractor_id: user.organisation.id,
          kind: "thickness",
          status: "draft",
          reference,
          created_by: user.id,
        })
        .onConflict(trx.raw("(contractor_id, site_id, kind) where status = 'draft'"))
        .ignore()
        .returning(["id", "reference"]);
      if (row) {
        draft = row as { id: string; reference: string };
        created = true;
        events.push({
          ownerId: site.owner_id,
          actor: actorOf(user),
          action: "submission.created",
          recordType: "submission",
          recordId: draft.id,
          after: { reference: draft.reference, status: "draft", kind: "thickness" },
          requestId,
        });
      } else draft = await find(); // another start created it meanwhile: join it
    }
    if (!draft) throw new Conflict("The open draft survey changed while starting; start the survey again.");
    const inserted: Array<{ circuit_id: string }> = await trx("survey_circuits")
      .insert(circuits.map((c) => ({ submission_id: draft.id, circuit_id: c.id })))
      .onConflict(["submission_id", "circuit_id"])
      .ignore()
      .returning("circuit_id");
    if (inserted.length > 0) {
      const tags = circuits.filter((c) => inserted.some((i) => i.circuit_id === c.id)).map((c) => c.tag);
      events.push({
        ownerId: site.owner_id,
        actor: actorOf(user),
        action: "survey.circuits_added",
        recordType: "submission",
        recordId: draft.id,
        after: { reference: draft.reference, circuits: tags.sort() },
        requestId,
      });
      await trx("submissions")
        .where({ id: draft.id })
        .update({ version: trx.raw("version + 1"), updated_at: trx.fn.now() });
    }
    await recordAudits(trx, events);
    return { submissionId: draft.id, reference: draft.reference, created, added: inserted.length };
  });
}

// --------------------------------------------------------------------------- reading

/** A CML of a surveyed circuit with what its new reading is judged against. */
export type SurveyCml = {
  id: string;
  tag: string;
  location: string;
  component: string;
  injectionPoint: boolean;
  circuitId: string;
  circuitTag: string;
  /** The base-line (the latest replacement's, else the CML's), when both date and thickness are known. */
  baseline: ThicknessReading | null;
  /** Approved readings since the base-line (after the latest replacement), oldest first. */
  history: ThicknessReading[];
  lastApproved: ThicknessReading | null;
  requiredThicknessMm: number | null;
  /** The reading saved in this survey, as text for the grid. */
  saved: SurveyRowText | null;
  /** Flags stored at the last submit (empty in a draft). */
  flags: QualityFlag[];
};

export type Survey = {
  id: string;
  reference: string;
  status: "draft" | "submitted" | "returned" | "approved" | "superseded";
  revision: number;
  version: number;
  ownerId: string;
  ownerName: string;
  siteId: string;
  siteName: string;
  timeZone: string;
  siteToday: string;
  decisionComment: string | null;
  submittedAt: string | null;
  circuits: Array<{ id: string; tag: string; description: string; requiredThickness: RequiredThicknessView }>;
  cmls: SurveyCml[];
  /** Readings can change (a draft or a returned survey). */
  editable: boolean;
};

type SurveyRow = {
  id: string;
  reference: string;
  status: Survey["status"];
  revision: number;
  version: number;
  owner_id: string;
  owner_name: string;
  site_id: string;
  site_name: string;
  time_zone: string;
  site_today: string;
  decision_comment: string | null;
  submitted_at: Date | null;
};

/** The contractor's survey rows at sites its thickness contracts cover (aliases `sub`, `s`, `o`). */
function surveysQuery(conn: Db, user: SessionUser) {
  return conn("submissions as sub")
    .join("sites as s", "s.id", "sub.site_id")
    .join("organisations as o", "o.id", "sub.owner_id")
    .where({ "sub.contractor_id": user.organisation.id, "sub.kind": "thickness" })
    .whereIn("sub.site_id", surveySiteIds(conn, user));
}

export type SurveySummary = {
  id: string;
  reference: string;
  status: Survey["status"];
  revision: number;
  siteName: string;
  ownerName: string;
  circuitTags: string[];
  readings: number;
  flagCount: number;
  createdAt: string;
  submittedAt: string | null;
  decidedAt: string | null;
  decisionComment: string | null;
  timeZone: string;
};

/** The contractor's surveys, newest first: drafts, returned (with the comment), submitted, approved. */
export async function listSurveys(conn: Db, user: SessionUser): Promise<SurveySummary[]> {
  requireTechnician(user);
  const rows: Array<{
    id: string;
    reference: string;
    status: Survey["status"];
    revision: number;
    site_name: string;
    owner_name: string;
    time_zone: string;
    circuit_tags: string[] | null;
    readings: number;
    flag_count: number;
    created_at: Date;
    submitted_at: Date | null;
    decided_at: Date | null;
    decision_comment: string | null;
  }> = await surveysQuery(conn, user)
    .whereNot("sub.status", "superseded")
    .orderByRaw("coalesce(sub.submitted_at, sub.created_at) desc, sub.id desc")
    .limit(200)
    .select(
      "sub.id",
      "sub.reference",
      "sub.status",
      "sub.revision",
      "s.name as site_name",
      "o.name as owner_name",
      "s.time_zone",
      conn.raw(
        "(select array_agg(c.tag order by c.tag) from survey_circuits sc join circuits c on c.id = sc.circuit_id where sc.submission_id = sub.id) as circuit_tags",
      ),
      conn.raw("(select count(*)::int from thickness_readings r where r.submission_id = sub.id) as readings"),
      "sub.flag_count",
      "sub.created_at",
      "sub.submitted_at",
      "sub.decided_at",
      "sub.decision_comment",
    );
  const iso = (d: Date | null) => (d ? new Date(d).toISOString() : null);
  return rows.map((r) => ({
    id: r.id,
    reference: r.reference,
    status: r.status,
    revision: r.revision,
    siteName: r.site_name,
    ownerName: r.owner_name,
    circuitTags: r.circuit_tags ?? [],
    readings: r.readings,
    flagCount: r.flag_count,
    createdAt: new Date(r.created_at).toISOString(),
    submittedAt: iso(r.submitted_at),
    decidedAt: iso(r.decided_at),
    decisionComment: r.decision_comment,
    timeZone: r.time_zone,
  }));
}

type StoredReading = {
  id: string;
  cml_id: string;
  measured_on: string;
  thickness_mm: string;
  quadrant_readings_mm: string[];
  method: SurveyMethod;
  instrument: string;
  instrument_resolution_mm: string | null;
  technician: string;
  notes: string;
  flags: QualityFlag[];
};

const valuesOf = (r: StoredReading): SurveyReadingValues => ({
  measuredOn: r.measured_on,
  thicknessMm: Number(r.thickness_mm),
  quadrantReadingsMm: r.quadrant_readings_mm.map(Number),
  method: r.method,
  instrument: r.instrument,
  resolutionMm: r.instrument_resolution_mm === null ? null : Number(r.instrument_resolution_mm),
  technician: r.technician,
  notes: r.notes,
});

const readingColumns = [
  "r.id",
  "r.cml_id",
  "r.measured_on",
  "r.thickness_mm",
  "r.quadrant_readings_mm",
  "r.method",
  "r.instrument",
  "r.instrument_resolution_mm",
  "r.technician",
  "r.notes",
  "r.flags",
];

/**
 * The CMLs of the given circuits with their base-lines, approved histories (after the latest
 * replacement) and required thickness: three queries whatever the number of CMLs.
 */
async function cmlsWithHistory(
  conn: Db,
  ownerId: string,
  siteId: string,
  circuitIds: string[],
): Promise<Omit<SurveyCml, "saved" | "flags">[]> {
  if (circuitIds.length === 0) return [];
  const cmls: Array<{
    id: string;
    tag: string;
    location: string;
    component: string;
    injection_point: boolean;
    circuit_id: string;
    circuit_tag: string;
    baseline_thickness_mm: string | null;
    baseline_on: string | null;
    replaced_on: string | null;
    replaced_baseline_mm: string | null;
  }> = await conn("cmls as m")
    .join("circuits as c", "c.id", "m.circuit_id")
    .where("m.owner_id", ownerId)
    .whereIn("m.circuit_id", circuitIds)
    .whereNull("m.retired_at")
    .orderBy("m.tag")
    .select(
      "m.id",
      "m.tag",
      "m.location",
      "m.component",
      "m.injection_point",
      "m.circuit_id",
      "c.tag as circuit_tag",
      "m.baseline_thickness_mm",
      conn.raw("to_char(m.baseline_on, 'YYYY-MM-DD') as baseline_on"),
      conn.raw(
        "(select to_char(x.replaced_on, 'YYYY-MM-DD') from cml_replacements x where x.cml_id = m.id order by x.replaced_on desc limit 1) as replaced_on",
      ),
      conn.raw(
        "(select x.baseline_thickness_mm from cml_replacements x where x.cml_id = m.id order by x.replaced_on desc limit 1) as replaced_baseline_mm",
      ),
    );
  if (cmls.length === 0) return [];
  const { rows: approved } = await conn.raw<{
    rows: Array<{ cml_id: string; measured_on: string; thickness_mm: string }>;
  }>(
    `select r.cml_id, to_char(r.measured_on, 'YYYY-MM-DD') as measured_on, r.thickness_mm
       from thickness_readings r
       join submissions s on s.id = r.submission_id and s.status = 'approved'
       join cmls m on m.id = r.cml_id
      where r.cml_id = any(?::uuid[])
        and r.measured_on >= coalesce((select max(x.replaced_on) from cml_replacements x where x.cml_id = m.id), '-infinity'::date)
      order by r.cml_id, r.measured_on`,
    [cmls.map((m) => m.id)],
  );
  const histories = new Map<string, ThicknessReading[]>();
  for (const a of approved) {
    const list = histories.get(a.cml_id) ?? [];
    // one reading a day enters the history (the latest approved survey's, if two share a day)
    if (list.length && list[list.length - 1].date === a.measured_on) list.pop();
    list.push({ date: a.measured_on, thicknessMm: Number(a.thickness_mm) });
    histories.set(a.cml_id, list);
  }
  const required = new Map(
    (await listCircuits(conn, ownerId, siteId)).map((c) => [
      c.id,
      c.requiredThickness.status === "ok" ? c.requiredThickness.requiredMm : null,
    ]),
  );
  return cmls.map((m) => {
    const history = histories.get(m.id) ?? [];
    const baseline =
      m.replaced_on !== null
        ? m.replaced_baseline_mm !== null
          ? { date: m.replaced_on, thicknessMm: Number(m.replaced_baseline_mm) }
          : null
        : m.baseline_on !== null && m.baseline_thickness_mm !== null
          ? { date: m.baseline_on, thicknessMm: Number(m.baseline_thickness_mm) }
          : null;
    return {
      id: m.id,
      tag: m.tag,
      location: m.location,
      component: m.component,
      injectionPoint: m.injection_point,
      circuitId: m.circuit_id,
      circuitTag: m.circuit_tag,
      baseline,
      history,
      lastApproved: history.length ? history[history.length - 1] : null,
      requiredThicknessMm: required.get(m.circuit_id) ?? null,
    };
  });
}

/** One of the contractor's surveys with its circuits, CMLs and saved readings (404 otherwise). */
export async function getSurvey(conn: Db, user: SessionUser, submissionId: string): Promise<Survey> {
  requireTechnician(user);
  if (!isUuid(submissionId)) throw new NotFoundInTenant("survey");
  const row: SurveyRow | undefined = await surveysQuery(conn, user)
    .where("sub.id", submissionId.toLowerCase())
    .first(
      "sub.id",
      "sub.reference",
      "sub.status",
      "sub.revision",
      "sub.version",
      "sub.owner_id",
      "o.name as owner_name",
      "sub.site_id",
      "s.name as site_name",
      "s.time_zone",
      conn.raw("to_char(site_today(sub.site_id), 'YYYY-MM-DD') as site_today"),
      "sub.decision_comment",
      "sub.submitted_at",
    );
  if (!row) throw new NotFoundInTenant("survey");
  const circuitRows: Array<{ id: string; tag: string; description: string }> = await conn("survey_circuits as sc")
    .join("circuits as c", "c.id", "sc.circuit_id")
    .where("sc.submission_id", row.id)
    .orderBy("c.tag")
    .select("c.id", "c.tag", "c.description");
  const designs = new Map((await listCircuits(conn, row.owner_id, row.site_id)).map((c) => [c.id, c]));
  const cmls = await cmlsWithHistory(
    conn,
    row.owner_id,
    row.site_id,
    circuitRows.map((c) => c.id),
  );
  const saved: StoredReading[] = await conn("thickness_readings as r")
    .where("r.submission_id", row.id)
    .select(
      readingColumns.map((c) =>
        c === "r.measured_on" ? conn.raw("to_char(r.measured_on, 'YYYY-MM-DD') as measured_on") : c,
      ),
    );
  const savedBy = new Map(saved.map((s) => [s.cml_id, s]));
  return {
    id: row.id,
    reference: row.reference,
    status: row.status,
    revision: row.revision,
    version: row.version,
    ownerId: row.owner_id,
    ownerName: row.owner_name,
    siteId: row.site_id,
    siteName: row.site_name,
    timeZone: row.time_zone,
    siteToday: row.site_today,
    decisionComment: row.status === "returned" ? row.decision_comment : null,
    submittedAt: row.submitted_at ? new Date(row.submitted_at).toISOString() : null,
    circuits: circuitRows.map((c) => ({
      ...c,
      requiredThickness: designs.get(c.id)?.requiredThickness ?? { status: "missing", missing: ["design data"] },
    })),
    cmls: cmls.map((m) => {
      const s = savedBy.get(m.id);
      return { ...m, saved: s ? surveyRowTextOf(valuesOf(s)) : null, flags: s?.flags ?? [] };
    }),
    editable: row.status === "draft" || row.status === "returned",
  };
}

// --------------------------------------------------------------------------- saving

const lockedSurvey = (s: { reference: string; status: string }) =>
  new Conflict(
    `Survey ${s.reference} is ${s.status}; its readings can no longer change. Ask the owner's engineer to return it if something needs correcting.`,
  );

/** Values in a fixed key order, so two readings compare as JSON. */
const ordered = (v: SurveyReadingValues): SurveyReadingValues => ({
  measuredOn: v.measuredOn,
  thicknessMm: v.thicknessMm,
  quadrantReadingsMm: v.quadrantReadingsMm,
  method: v.method,
  instrument: v.instrument,
  resolutionMm: v.resolutionMm,
  technician: v.technician,
  notes: v.notes,
});

export type SaveOutcome = { saved: number; cleared: number; unchanged: number };

/**
 * Checks every row against its CML and writes the changed readings of a draft or returned
 * survey in one transaction: a row per CML of the survey's circuits (`rows` by CML id);
 * blank rows are skipped, and a blank row whose CML had a saved reading clears it. Every
 * field's problem is reported together (keys `<cml id>.<field>`, messages naming the CML),
 * and nothing is written when there is one (`onErrors` words them). CMLs absent from `rows`
 * keep their readings (a CSV import names only some).
 */
async function writeSurveyRows(
  conn: Knex,
  user: SessionUser,
  submissionId: string,
  rows: Map<string, SurveyRowText>,
  requestId: string | undefined,
  onErrors: (errors: FieldErrors, cmls: Map<string, SurveyCml>) => never,
): Promise<SaveOutcome> {
  requireTechnician(user);
  if (!isUuid(submissionId)) throw new NotFoundInTenant("survey");
  return conn.transaction(async (trx) => {
    await trx("submissions")
      .where({ id: submissionId.toLowerCase(), contractor_id: user.organisation.id, kind: "thickness" })
      .forUpdate()
      .first("id");
    const survey = await getSurvey(trx, user, submissionId);
    if (!survey.editable) throw lockedSurvey(survey);
    const cmls = new Map(survey.cmls.map((m) => [m.id, m]));
    const foreign = [...rows.keys()].filter((id) => !cmls.has(id.toLowerCase()));
    if (foreign.length > 0)
      throw new Invalid({
        form: `The form names ${foreign.length === 1 ? "a CML that is" : `${foreign.length} CMLs that are`} not on this survey's circuits; reload the page and enter the readings again.`,
      });
    const errors: FieldErrors = {};
    const writes: Array<{ cml: SurveyCml; values: SurveyReadingValues }> = [];
    const clears: SurveyCml[] = [];
    for (const [id, text] of rows) {
      const cml = cmls.get(id.toLowerCase()) as SurveyCml;
      const parsed = parseSurveyRow(text, {
        cmlTag: cml.tag,
        siteToday: survey.siteToday,
        lastApprovedOn: cml.lastApproved?.date ?? null,
      });
      if ("errors" in parsed) {
        for (const [field, message] of Object.entries(parsed.errors)) errors[`${cml.id}.${field}`] = message;
      } else if ("empty" in parsed) {
        if (cml.saved) clears.push(cml);
      } else writes.push({ cml, values: ordered(parsed.reading) });
    }
    if (Object.keys(errors).length > 0) onErrors(errors, cmls);
    const events: AuditInput[] = [];
    const upserts: unknown[] = [];
    let unchanged = 0;
    for (const { cml, values } of writes) {
      const before = cml.saved
        ? parseSurveyRow(cml.saved, { cmlTag: cml.tag, siteToday: "9999-12-31", lastApprovedOn: null })
        : null;
      const prior = before && "reading" in before ? ordered(before.reading) : null;
      if (prior && JSON.stringify(prior) === JSON.stringify(values)) {
        unchanged += 1;
        continue;
      }
      upserts.push({
        submission_id: survey.id,
        cml_id: cml.id,
        measured_on: values.measuredOn,
        thickness_mm: values.thicknessMm,
        quadrant_readings_mm: values.quadrantReadingsMm,
        method: values.method,
        instrument: values.instrument,
        instrument_resolution_mm: values.resolutionMm,
        technician: values.technician,
        notes: values.notes,
      });
      events.push({
        ownerId: survey.ownerId,
        actor: actorOf(user),
        action: prior ? "thickness_reading.edited" : "thickness_reading.entered",
        recordType: "submission",
        recordId: survey.id,
        before: prior ? { cml: cml.tag, ...prior } : undefined,
        after: { cml: cml.tag, ...values },
        requestId,
      });
    }
    if (upserts.length > 0)
      await trx.raw(
        `insert into thickness_readings (submission_id, cml_id, measured_on, thickness_mm, quadrant_readings_mm, method,
                instrument, instrument_resolution_mm, technician, notes)
         select v.submission_id, v.cml_id, v.measured_on, v.thickness_mm, v.quadrant_readings_mm, v.method,
                v.instrument, v.instrument_resolution_mm, v.technician, v.notes
           from jsonb_to_recordset(?::jsonb) as v(submission_id uuid, cml_id uuid, measured_on date, thickness_mm numeric,
                quadrant_readings_mm numeric[], method text, instrument text, instrument_resolution_mm numeric,
                technician text, notes text)
         on conflict (submission_id, cml_id) do update set
                measured_on = excluded.measured_on, thickness_mm = excluded.thickness_mm,
                quadrant_readings_mm = excluded.quadrant_readings_mm, method = excluded.method,
                instrument = excluded.instrument, instrument_resolution_mm = excluded.instrument_resolution_mm,
                technician = excluded.technician, notes = excluded.notes, flags = '[]', updated_at = now()`,
        [JSON.stringify(upserts)],
      );
    if (clears.length > 0) {
      await trx("thickness_readings")
        .where("submission_id", survey.id)
        .whereIn(
          "cml_id",
          clears.map((c) => c.id),
        )
        .del();
      for (const c of clears)
        events.push({
          ownerId: survey.ownerId,
          actor: actorOf(user),
          action: "thickness_reading.cleared",
          recordType: "submission",
          recordId: survey.id,
          before: { cml: c.tag, measuredOn: c.saved?.measuredOn, readings: c.saved?.readings.filter(Boolean) },
          requestId,
        });
    }
    if (events.length > 0) {
      await trx("submissions")
        .where({ id: survey.id })
        .update({ version: trx.raw("version + 1"), updated_at: trx.fn.now() });
      await recordAudits(trx, events);
    }
    return { saved: upserts.length, cleared: clears.length, unchanged };
  });
}

/** Saves the whole grid (rows by CML id) of a draft or returned survey: see writeSurveyRows. */
export async function saveSurveyReadings(
  conn: Knex,
  user: SessionUser,
  submissionId: string,
  rows: Map<string, SurveyRowText>,
  requestId?: string,
): Promise<SaveOutcome> {
  return writeSurveyRows(conn, user, submissionId, rows, requestId, (errors) => {
    throw new Invalid(errors);
  });
}

// --------------------------------------------------------------------------- CSV import

/** The import's columns, our own names; readings in mm. */
export const SURVEY_CSV_COLUMNS = [
  { name: "CML tag", field: "tag", help: "the CML's tag, as on the survey" },
  { name: "date", field: "measuredOn", help: "the site's calendar day, YYYY-MM-DD" },
  ...Array.from({ length: READING_FIELDS }, (_, i) => ({
    name: `reading ${i + 1} mm`,
    field: `reading${i + 1}`,
    help: `thickness reading ${i + 1}, mm (one is enough; the minimum is the CML's thickness)`,
  })),
  { name: "method", field: "method", help: "UT, UT-scan, RT, EMAT or other" },
  { name: "instrument", field: "instrument", help: "gauge make, model or serial" },
  { name: "resolution mm", field: "resolutionMm", help: "the gauge's display resolution, mm" },
  { name: "technician", field: "technician", help: "who took the reading" },
  { name: "notes", field: "notes", help: "free text" },
] as const;

/** Maps a row field of the spec to the CSV column it came from. */
const columnOfField: Record<string, string> = {
  measuredOn: "date",
  readings: "reading 1 mm",
  method: "method",
  instrument: "instrument",
  resolutionMm: "resolution mm",
  technician: "technician",
  notes: "notes",
};

export const SURVEY_CSV_MAX_BYTES = 2 * 1024 * 1024;

/** The template: our headers, and a row per CML of the survey with only its tag filled in. */
export async function surveyTemplateCsv(conn: Db, user: SessionUser, submissionId: string): Promise<string> {
  const survey = await getSurvey(conn, user, submissionId);
  return toCsv(
    SURVEY_CSV_COLUMNS.map((c) => c.name),
    survey.cmls.map((m) => [m.tag, ...SURVEY_CSV_COLUMNS.slice(1).map(() => "")]),
  );
}

export type SurveyRowProblem = { line: number; column: string; message: string };

/**
 * Readings from a CSV file into a draft or returned survey: one row per CML (by tag), the
 * same row rules as the grid. The whole file is checked first and saved in one
 * transaction; one bad row rejects the file (every problem named by line and column).
 * Rows name only the CMLs they change; importing the same file again changes nothing.
 */
export async function importSurveyCsv(
  conn: Knex,
  user: SessionUser,
  submissionId: string,
  csv: string,
  requestId?: string,
): Promise<SaveOutcome & { rows: number }> {
  requireTechnician(user);
  const survey = await getSurvey(conn, user, submissionId);
  if (!survey.editable) throw lockedSurvey(survey);
  let records: string[][];
  try {
    records = parse(csv.replace(/^\uFEFF/, ""), { skip_empty_lines: true, relax_column_count: true, trim: true });
  } catch (error) {
    throw new Invalid({ file: `The file is not readable as CSV: ${(error as Error).message}` });
  }
  const problems: SurveyRowProblem[] = [];
  const header = (records[0] ?? []).map((h) => h.trim().toLowerCase());
  const index = new Map(SURVEY_CSV_COLUMNS.map((c) => [c.name, header.indexOf(c.name.toLowerCase())]));
  const missing = SURVEY_CSV_COLUMNS.filter((c) => index.get(c.name) === -1).map((c) => `“${c.name}”`);
  if (records.length === 0 || missing.length > 0)
    throw new Invalid({
      file: `The file's first line must name the columns; ${missing.length ? `missing: ${missing.join(", ")}` : "the file is empty"}. Download the template for this survey.`,
    });
  if (records.length === 1) throw new Invalid({ file: "The file has the headers but no rows of readings." });
  const byTag = new Map(survey.cmls.map((m) => [m.tag.toLowerCase(), m]));
  const rows = new Map<string, SurveyRowText>();
  const lineOf = new Map<string, number>();
  records.slice(1).forEach((record, i) => {
    const line = i + 2;
    const cell = (name: string) => record[index.get(name) as number] ?? "";
    const tag = cell("CML tag");
    if (!tag) return problems.push({ line, column: "CML tag", message: "The CML tag is missing." });
    const cml = byTag.get(tag.toLowerCase());
    if (!cml)
      return problems.push({
        line,
        column: "CML tag",
        message: `No CML tagged ${tag.slice(0, 40)} is on this survey's circuits.`,
      });
    if (rows.has(cml.id))
      return problems.push({
        line,
        column: "CML tag",
        message: `CML ${cml.tag} is on line ${lineOf.get(cml.id)} already; one row per CML.`,
      });
    const text: SurveyRowText = {
      ...emptySurveyRow(),
      measuredOn: cell("date"),
      readings: Array.from({ length: READING_FIELDS }, (_, r) => cell(`reading ${r + 1} mm`)),
      method: cell("method"),
      instrument: cell("instrument"),
      resolutionMm: cell("resolution mm"),
      technician: cell("technician"),
      notes: cell("notes"),
    };
    rows.set(cml.id, text);
    lineOf.set(cml.id, line);
  });
  // A row with only its tag (the template as downloaded) changes nothing: it is not sent.
  for (const [id, text] of rows) if (text.readings.every((r) => !r.trim()) && !text.notes.trim()) rows.delete(id);
  const fail = (extra: SurveyRowProblem[]): never => {
    const all = [...problems, ...extra].sort((a, b) => a.line - b.line);
    throw refusedFile({ problems: all });
  };
  if (problems.length > 0) fail([]);
  if (rows.size === 0) throw new Invalid({ file: "No row of the file has a reading." });
  const outcome = await writeSurveyRows(conn, user, survey.id, rows, requestId, (errors, cmls) =>
    fail(
      Object.entries(errors).map(([key, message]) => {
        const [cmlId, field] = key.split(".");
        return {
          line: lineOf.get(cmlId) ?? 0,
          column: columnOfField[field] ?? "CML tag",
          message: message ?? `CML ${cmls.get(cmlId)?.tag}: check this value.`,
        };
      }),
    ),
  );
  return { ...outcome, rows: rows.size };
}

// --------------------------------------------------------------------------- submitting

/** A survey's revision snapshot entry (the contract with the review side). */
export type SurveySnapshotReading = {
  cml_id: string;
  cml_tag: string;
  circuit_tag: string;
  measured_on: string;
  thickness_mm: number;
  quadrant_readings_mm: number[];
  method: SurveyMethod;
  instrument: string;
  instrument_resolution_mm: number | null;
  technician: string;
  notes: string;
  flags: QualityFlag[];
};

/**
 * Submits a draft or returned survey inside `submitForReview`'s transaction (the submission
 * row is locked and its status checked there): every reading's flags are recomputed with
 * the same domain code the grid uses (`surveyReadingFlags`, history = the CML's approved
 * readings after its latest replacement, required thickness from the circuit), the readings
 * and the submission get their flags, the revision is snapshotted with the survey's files,
 * and the submit is audited and notified. A survey without readings is refused.
 */
export async function submitSurvey(
  trx: Knex.Transaction,
  user: SessionUser,
  submission: { id: string; reference: string; status: string; revision: number; ownerId: string },
  reply: string,
  requestId?: string,
): Promise<{ reference: string }> {
  const survey = await getSurvey(trx, user, submission.id);
  const readings: Array<StoredReading> = await trx("thickness_readings as r")
    .where("r.submission_id", survey.id)
    .select(
      readingColumns.map((c) =>
        c === "r.measured_on" ? trx.raw("to_char(r.measured_on, 'YYYY-MM-DD') as measured_on") : c,
      ),
    );
  if (readings.length === 0) throw new Invalid({ form: "The survey has no readings yet: enter at least one." });
  const cmls = new Map(survey.cmls.map((m) => [m.id, m]));
  const errors: FieldErrors = {};
  const snapshot: SurveySnapshotReading[] = [];
  for (const r of readings) {
    const cml = cmls.get(r.cml_id);
    const v = valuesOf(r);
    if (!cml) {
      errors.form = "A reading belongs to a CML that is no longer on the survey's circuits; remove it and save again.";
      continue;
    }
    // Another survey may have been approved since this one was saved.
    if (cml.lastApproved && v.measuredOn <= cml.lastApproved.date) {
      errors[`${cml.id}.measuredOn`] =
        `CML ${cml.tag}: the date ${v.measuredOn} is not after its last approved reading on ${cml.lastApproved.date}; correct the date or the reading.`;
      continue;
    }
    const flags = surveyReadingFlags({
      reading: { date: v.measuredOn, thicknessMm: v.thicknessMm, quadrantReadingsMm: v.quadrantReadingsMm },
      history: cml.history,
      baseline: cml.baseline,
      requiredThicknessMm: cml.requiredThicknessMm,
      instrumentResolutionMm: v.resolutionMm,
    });
    snapshot.push({
      cml_id: cml.id,
      cml_tag: cml.tag,
      circuit_tag: cml.circuitTag,
      measured_on: v.measuredOn,
      thickness_mm: v.thicknessMm,
      quadrant_readings_mm: v.quadrantReadingsMm,
      method: v.method,
      instrument: v.instrument,
      instrument_resolution_mm: v.resolutionMm,
      technician: v.technician,
      notes: v.notes,
      flags,
    });
  }
  if (Object.keys(errors).length > 0) throw new Invalid(errors);
  snapshot.sort((a, b) => (a.cml_tag < b.cml_tag ? -1 : a.cml_tag > b.cml_tag ? 1 : 0));
  const flagCount = snapshot.reduce((n, s) => n + s.flags.length, 0);
  // The flags are written while the survey is still open (the guard refuses changes once submitted).
  await trx.raw(
    `update thickness_readings r set flags = v.flags, updated_at = now()
       from jsonb_to_recordset(?::jsonb) as v(cml_id uuid, flags jsonb)
      where r.submission_id = ? and r.cml_id = v.cml_id`,
    [JSON.stringify(snapshot.map((s) => ({ cml_id: s.cml_id, flags: s.flags }))), survey.id],
  );
  const files: Array<{ id: string; kind: string; original_name: string; sha256: string }> = await trx("attachments")
    .where({ submission_id: survey.id, state: "stored" })
    .orderBy("created_at")
    .select("id", "kind", "original_name", "sha256");
  await recordSubmittedRevision(trx, user, submission, {
    reply,
    worstSeverity: null,
    flagCount,
    snapshot,
    files: files.map((f) => ({
      id: f.id,
      submissionId: survey.id,
      kind: f.kind,
      name: cleanFileName(f.original_name),
      sha256: f.sha256,
    })),
    audit: { kind: "thickness", readings: snapshot.length, flags: flagCount },
    requestId,
  });
  return { reference: submission.reference };
}
