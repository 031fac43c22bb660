import type { Knex } from "knex";
import type { SessionUser } from "../context";
import { assessCoupon, type CouponGeometry, type CouponAssessment, type CouponResultInput } from "../domain/index.ts";
import { geometryOf, type CouponShape } from "../services/coupon-spec";
import { labTextOf, type LabInputs, type LabText } from "../services/lab-spec";
import type { Db } from "../services/db.server";
import { Conflict, Forbidden, Invalid, NotFoundInTenant } from "../services/outcome";
import { can } from "../services/permissions";
import { actorOf, recordAudits, type AuditInput } from "./audit.server";
import { couponWorkSiteIds } from "./contract-coverage.server";
import { ownerSettings } from "./owner-settings.server";
import { nextReferences } from "./submission-references.server";

/**
 * Lab results of removed coupons: what the lab page shows, the calculation input built
 * from them, and saving them into the contractor's open draft submission for the site.
 */

export type ExposureForLab = {
  exposureId: string;
  ownerId: string;
  siteId: string;
  siteName: string;
  timeZone: string;
  pointTag: string;
  circuitTag: string;
  coupon: {
    serial: string;
    materialCode: string;
    densityGcm3: number;
    densitySource: string;
    geometry: CouponGeometry;
    initialMassG: number;
    balanceResolutionG: number;
  };
  installedAt: string;
  removedAt: string;
  pittingVisible: boolean | null;
  deposits: string;
  /** General rates of the point's earlier approved results (newest six), mm/y. */
  historyMmPerYear: number[];
  /** Pitting rates of those results that measured pits (newest six), mm/y. */
  pittingHistoryMmPerYear: number[];
  /** The result already entered in an open (draft or returned) submission, if any. */
  draft: null | {
    submissionId: string;
    reference: string;
    status: string;
    inputs: LabInputs;
    /** What was typed ("0.30" stays "0.30"); rebuilt from the numbers for results saved before it was kept. */
    text: LabText;
    labNotes: string;
    cleaningMethod: string;
    /** The engineer's comment when the submission came back (or the correction's reason). */
    returnComment: string | null;
  };
  locked: null | { reference: string; status: string };
};

/** What the technician types on the lab form (masses g, depths mm). */
export type { LabInputs };

export async function exposureForLab(conn: Db, user: SessionUser, exposureId: string): Promise<ExposureForLab> {
  const exposure = (await exposuresForLab(conn, user, [exposureId])).get(exposureId);
  if (!exposure) throw new NotFoundInTenant("removed coupon");
  return exposure;
}

type ExposureRow = {
  id: string;
  owner_id: string;
  site_id: string;
  site_name: string;
  time_zone: string;
  point_tag: string;
  circuit_tag: string;
  installed_at: Date;
  removed_at: Date;
  pitting_visible: boolean | null;
  deposits: string;
  serial: string;
  material_code: string;
  density_g_cm3: string;
  density_source: string;
  shape: CouponShape;
  length_mm: string | null;
  width_mm: string | null;
  thickness_mm: string | null;
  diameter_mm: string | null;
  hole_diameter_mm: string | null;
  exposed_ends: number | null;
  initial_mass_g: string;
  balance_resolution_g: string;
};

type ResultRow = {
  exposure_id: string;
  id: string;
  reference: string;
  status: string;
  inputs: { calculation: CouponResultInput; lab: LabInputs; text?: LabText };
  lab_notes: string;
  cleaning_method: string;
  decision_comment: string | null;
};

/**
 * `exposureForLab` for many removed coupons in a constant number of queries (the
 * exposures with their coupon, point and site; every result of them in a submission not
 * superseded; the points' approved histories). Exposures the user may not work on, or
 * not removed, are absent from the map.
 */
export async function exposuresForLab(
  conn: Db,
  user: SessionUser,
  exposureIds: string[],
): Promise<Map<string, ExposureForLab>> {
  const out = new Map<string, ExposureForLab>();
  if (exposureIds.length === 0) return out;
  const rows: ExposureRow[] = await conn("coupon_exposures as e")
    .join("monitoring_points as p", "p.id", "e.point_id")
    .join("circuits as ci", "ci.id", "p.circuit_id")
    .join("sites as s", "s.id", "p.site_id")
    .join("coupons as c", "c.id", "e.coupon_id")
    .whereIn("e.id", exposureIds)
    .whereNotNull("e.removed_at")
    .whereIn("p.site_id", couponWorkSiteIds(conn, user))
    .modify((q) => {
      if (user.organisation.kind === "contractor") q.where("e.removed_by_organisation_id", user.organisation.id);
    })
    .select(
      "e.id",
      "e.owner_id",
      "p.site_id",
      "s.name as site_name",
      "s.time_zone",
      "p.tag as point_tag",
      "ci.tag as circuit_tag",
      "e.installed_at",
      "e.removed_at",
      "e.pitting_visible",
      "e.deposits",
      "c.serial",
      "c.material_code",
      "c.density_g_cm3",
      "c.density_source",
      "c.shape",
      "c.length_mm",
      "c.width_mm",
      "c.thickness_mm",
      "c.diameter_mm",
      "c.hole_diameter_mm",
      "c.exposed_ends",
      "c.initial_mass_g",
      "c.balance_resolution_g",
    );
  if (rows.length === 0) return out;
  const found = rows.map((r) => r.id);
  const results: ResultRow[] = await conn("coupon_results as r")
    .join("submissions as sub", "sub.id", "r.submission_id")
    .whereIn("r.exposure_id", found)
    .whereNot("sub.status", "superseded")
    .orderBy("sub.created_at", "desc")
    .select(
      "r.exposure_id",
      "sub.id",
      "sub.reference",
      "sub.status",
      "r.inputs",
      "r.lab_notes",
      "r.cleaning_method",
      "sub.decision_comment",
    );
  const resultsOf = new Map<string, ResultRow[]>();
  for (const r of results) resultsOf.set(r.exposure_id, [...(resultsOf.get(r.exposure_id) ?? []), r]);
  const histories = await approvedRatesAtPoints(conn, found);
  for (const row of rows) {
    const own = resultsOf.get(row.id) ?? [];
    const open = own.find((r) => r.status === "draft" || r.status === "returned");
    // An open submission (a returned one, or a correction of an approved one) takes precedence.
    const locked = open ? undefined : own.find((r) => r.status === "submitted" || r.status === "approved");
    const history = histories.get(row.id) ?? { general: [], pitting: [] };
    out.set(row.id, {
      exposureId: row.id,
      ownerId: row.owner_id,
      siteId: row.site_id,
      siteName: row.site_name,
      timeZone: row.time_zone,
      pointTag: row.point_tag,
      circuitTag: row.circuit_tag,
      coupon: {
        serial: row.serial,
        materialCode: row.material_code,
        densityGcm3: Number(row.density_g_cm3),
        densitySource: row.density_source,
        geometry: geometryOf(row),
        initialMassG: Number(row.initial_mass_g),
        balanceResolutionG: Number(row.balance_resolution_g),
      },
      installedAt: new Date(row.installed_at).toISOString(),
      removedAt: new Date(row.removed_at).toISOString(),
      pittingVisible: row.pitting_visible,
      deposits: row.deposits,
      historyMmPerYear: history.general,
      pittingHistoryMmPerYear: history.pitting,
      draft: open
        ? {
            submissionId: open.id,
            reference: open.reference,
            status: open.status,
            inputs: open.inputs.lab,
            text: open.inputs.text ?? labTextOf(open.inputs.lab),
            labNotes: open.lab_notes,
            cleaningMethod: open.cleaning_method,
            returnComment: open.status === "returned" ? open.decision_comment : null,
          }
        : null,
      locked: locked ? { reference: locked.reference, status: locked.status } : null,
    });
  }
  return out;
}

/**
 * For each exposure, the general and the pitting rates (mm/y) of the approved, not
 * superseded, results at the same point removed before it (newest first, six at most):
 * the history a new result is compared with. One query for every exposure.
 */
export async function approvedRatesAtPoints(
  conn: Db,
  exposureIds: string[],
): Promise<Map<string, { general: number[]; pitting: number[] }>> {
  const out = new Map<string, { general: number[]; pitting: number[] }>();
  for (const id of exposureIds) out.set(id, { general: [], pitting: [] });
  if (exposureIds.length === 0) return out;
  const { rows } = await conn.raw<{
    rows: Array<{ exposure_id: string; kind: "general" | "pitting"; rates: number[] }>;
  }>(
    `select this.id as exposure_id, k.kind,
            coalesce((select array_agg(x.rate order by x.removed_at desc)
                        from (select (r.computed -> k.path ->> 'mmPerYear')::float8 as rate, e.removed_at
                                from coupon_exposures e
                                join coupon_results r on r.exposure_id = e.id
                                join submissions s on s.id = r.submission_id and s.status = 'approved'
                               where e.point_id = this.point_id and e.id <> this.id and e.removed_at < this.removed_at
                                 and r.computed -> k.path ->> 'mmPerYear' is not null
                               order by e.removed_at desc
                               limit 6) x), '{}') as rates
       from coupon_exposures this
       cross join (values ('general', 'rate'), ('pitting', 'pitting')) as k(kind, path)
      where this.id = any(?::uuid[])`,
    [exposureIds],
  );
  for (const r of rows) {
    const entry = out.get(r.exposure_id);
    if (entry) entry[r.kind] = r.rates.map(Number);
  }
  return out;
}

/** The calculation input for an exposure and the lab's numbers, with the owner's thresholds. */
export function calculationInput(
  exposure: Pick<
    ExposureForLab,
    "coupon" | "installedAt" | "removedAt" | "pittingVisible" | "historyMmPerYear" | "pittingHistoryMmPerYear"
  >,
  lab: LabInputs,
  settings: Awaited<ReturnType<typeof ownerSettings>>,
): CouponResultInput {
  return {
    geometry: exposure.coupon.geometry,
    materialKey: exposure.coupon.materialCode,
    densityGcm3: exposure.coupon.densityGcm3,
    densitySource: exposure.coupon.densitySource,
    initialMassG: exposure.coupon.initialMassG,
    balanceResolutionG: exposure.coupon.balanceResolutionG,
    installedAt: exposure.installedAt,
    removedAt: exposure.removedAt,
    couponMassesG: lab.couponMassesG,
    finalMassG: lab.finalMassG,
    blankInitialMassG: lab.blankInitialMassG,
    blankMassesG: lab.blankMassesG,
    baseMetalFromCycle: lab.baseMetalFromCycle,
    pitDepthsMm: lab.pitDepthsMm,
    pittingVisible: exposure.pittingVisible,
    generalThresholds: settings.generalThresholds,
    pittingThresholds: settings.pittingThresholds,
    familyThresholds: settings.familyThresholds,
    minimumExposureDays: settings.minimumExposureDays,
    historyMmPerYear: exposure.historyMmPerYear,
    pittingHistoryMmPerYear: exposure.pittingHistoryMmPerYear,
  };
}

const labKeys: Array<keyof LabInputs> = [
  "cleaningMethod",
  "couponMassesG",
  "finalMassG",
  "blankInitialMassG",
  "blankMassesG",
  "baseMetalFromCycle",
  "pitDepthsMm",
  "labNotes",
];
function sameLab(a: LabInputs, b: LabInputs): boolean {
  return labKeys.every((k) => JSON.stringify(a[k] ?? null) === JSON.stringify(b[k] ?? null));
}

/** The same text typed (key by key: a jsonb column does not keep the order of keys). */
function sameText(a: LabText, b: LabText): boolean {
  const keys = new Set([...Object.keys(a), ...Object.keys(b)] as Array<keyof LabText>);
  return [...keys].every((k) => JSON.stringify(a[k] ?? "") === JSON.stringify(b[k] ?? ""));
}

/** One coupon's lab results, checked and computed, ready to be written (`writeLabResults`). */
export type LabEntry = {
  exposure: ExposureForLab;
  lab: LabInputs;
  /** What was typed, kept for display. */
  text: LabText;
  input: CouponResultInput;
  result: CouponAssessment;
};

/**
 * Checks one coupon's lab results against its exposure: a coupon already in a submitted
 * or approved submission is a Conflict, a result with errors is Invalid (nothing is
 * saved). `unchanged` when the open draft holds the same numbers and text already.
 */
export function assessLabEntry(
  exposure: ExposureForLab,
  lab: LabInputs,
  text: LabText,
  settings: Awaited<ReturnType<typeof ownerSettings>>,
): LabEntry & { unchanged: boolean } {
  if (exposure.locked) {
    throw new Conflict(
      `These results are already in submission ${exposure.locked.reference} (${exposure.locked.status}).`,
    );
  }
  const input = calculationInput(exposure, lab, settings);
  const outcome = assessCoupon(input);
  if (!outcome.ok) throw new Invalid(outcome.errors);
  // Saving the same numbers again (a repeated CSV import, a double click) changes nothing.
  const unchanged = Boolean(
    exposure.draft && sameLab(exposure.draft.inputs, lab) && sameText(exposure.draft.text, text),
  );
  return { exposure, lab, text, input, result: outcome.result, unchanged };
}

type DraftRow = { id: string; site_id: string };

/**
 * The contractor's open draft submission at each site, locked, created where there is
 * none (with its audit event): one query for the drafts, and for the sites without one,
 * one for the references and one insert.
 */
async function openDrafts(
  trx: Knex.Transaction,
  user: SessionUser,
  sites: Array<{ siteId: string; ownerId: string }>,
  requestId: string | undefined,
  events: AuditInput[],
): Promise<Map<string, string>> {
  const bySite = new Map<string, string>();
  if (sites.length === 0) return bySite;
  const read = async (siteIds: string[]) => {
    const rows: DraftRow[] = await trx("submissions")
      .where({ contractor_id: user.organisation.id, kind: "coupon", status: "draft" })
      .whereIn("site_id", siteIds)
      .forUpdate()
      .select("id", "site_id");
    for (const r of rows) bySite.set(r.site_id, r.id);
  };
  await read(sites.map((s) => s.siteId));
  const missing = sites.filter((s) => !bySite.has(s.siteId));
  if (missing.length === 0) return bySite;
  const references = await nextReferences(
    trx,
    missing.map((s) => s.siteId),
  );
  // One open draft per contractor, site and kind (unique index submissions_one_open_draft):
  // when another save created it since the read above, this one joins it.
  const created: Array<{ id: string; site_id: string; owner_id: string; reference: string }> = await trx("submissions")
    .insert(
      missing.map((s) => ({
        owner_id: s.ownerId,
        site_id: s.siteId,
        contractor_id: user.organisation.id,
        kind: "coupon",
        status: "draft",
        reference: references.get(s.siteId),
        created_by: user.id,
      })),
    )
    .onConflict(trx.raw("(contractor_id, site_id, kind) where status = 'draft'"))
    .ignore()
    .returning(["id", "site_id", "owner_id", "reference"]);
  for (const c of created) {
    bySite.set(c.site_id, c.id);
    events.push({
      ownerId: c.owner_id,
      actor: actorOf(user),
      action: "submission.created",
      recordType: "submission",
      recordId: c.id,
      after: { reference: c.reference, status: "draft", kind: "coupon" },
      requestId,
    });
  }
  const raced = missing.filter((s) => !bySite.has(s.siteId)).map((s) => s.siteId);
  if (raced.length) await read(raced);
  if (raced.some((siteId) => !bySite.has(siteId)))
    throw new Conflict("The open draft changed while saving; save the results again.");
  return bySite;
}

/** The columns of coupon_results a lab entry writes, as jsonb_to_recordset reads them. */
const resultColumns = `submission_id uuid, exposure_id uuid, cleaning_method text, coupon_masses_g numeric[],
  blank_initial_mass_g numeric, blank_masses_g numeric[], base_metal_from_cycle integer, final_mass_g numeric,
  pit_depths_mm numeric[], lab_notes text, inputs jsonb, computed jsonb, flags jsonb, general_severity text,
  pitting_severity text`;
const resultNames = `submission_id, exposure_id, cleaning_method, coupon_masses_g, blank_initial_mass_g, blank_masses_g,
  base_metal_from_cycle, final_mass_g, pit_depths_mm, lab_notes, inputs, computed, flags, general_severity,
  pitting_severity`;

/**
 * Writes checked lab entries into the contractor's open submissions, set-wise: each
 * entry goes into the open submission that already holds its coupon, else into the
 * site's open draft (found or created once per site); the results are inserted and
 * updated in one statement each, every submission's version moves once, and the audit
 * events (one per result, after any draft created) are appended in one statement.
 * Returns each entry's submission id, in order.
 */
export async function writeLabResults(
  trx: Knex.Transaction,
  user: SessionUser,
  entries: LabEntry[],
  requestId?: string,
): Promise<string[]> {
  if (entries.length === 0) return [];
  const events: AuditInput[] = [];
  const needDraft = new Map<string, { siteId: string; ownerId: string }>();
  for (const e of entries)
    if (!e.exposure.draft) needDraft.set(e.exposure.siteId, { siteId: e.exposure.siteId, ownerId: e.exposure.ownerId });
  const drafts = await openDrafts(trx, user, [...needDraft.values()], requestId, events);
  const submissionIds = entries.map((e) => e.exposure.draft?.submissionId ?? drafts.get(e.exposure.siteId) ?? "");
  const before: Array<{ id: string; submission_id: string; exposure_id: string; lab: LabInputs }> = await trx(
    "coupon_results",
  )
    .whereIn(
      "exposure_id",
      entries.map((e) => e.exposure.exposureId),
    )
    .whereIn("submission_id", [...new Set(submissionIds)])
    .select("id", "submission_id", "exposure_id", trx.raw("inputs -> 'lab' as lab"));
  const existing = new Map(before.map((b) => [`${b.submission_id}/${b.exposure_id}`, b]));
  const inserts: unknown[] = [];
  const updates: unknown[] = [];
  entries.forEach(({ exposure, lab, text, input, result }, i) => {
    const submissionId = submissionIds[i];
    const values = {
      submission_id: submissionId,
      exposure_id: exposure.exposureId,
      cleaning_method: lab.cleaningMethod.trim(),
      coupon_masses_g: lab.couponMassesG,
      blank_initial_mass_g: lab.blankInitialMassG,
      blank_masses_g: lab.blankMassesG,
      base_metal_from_cycle: lab.baseMetalFromCycle,
      final_mass_g: lab.couponMassesG.length ? null : lab.finalMassG,
      pit_depths_mm: lab.pitDepthsMm,
      lab_notes: lab.labNotes.trim(),
      inputs: { calculation: input, lab, text },
      computed: result,
      flags: result.flags,
      general_severity: result.severity.general,
      pitting_severity: result.severity.pitting,
    };
    const prior = existing.get(`${submissionId}/${exposure.exposureId}`);
    if (prior) updates.push({ id: prior.id, ...values });
    else inserts.push(values);
    events.push({
      ownerId: exposure.ownerId,
      actor: actorOf(user),
      action: prior ? "lab_result.edited" : "lab_result.entered",
      recordType: "submission",
      recordId: submissionId,
      before: prior ? { lab: prior.lab } : undefined,
      after: {
        coupon: exposure.coupon.serial,
        lab,
        mmPerYear: result.rate?.mmPerYear ?? null,
        worst: result.severity.worst,
      },
      requestId,
    });
  });
  if (updates.length)
    await trx.raw(
      `update coupon_results r
          set (${resultNames}, updated_at) = (${resultNames.replace(/(\w+)/g, "v.$1")}, now())
         from jsonb_to_recordset(?::jsonb) as v(id uuid, ${resultColumns})
        where r.id = v.id`,
      [JSON.stringify(updates)],
    );
  if (inserts.length)
    await trx.raw(
      `insert into coupon_results (${resultNames})
       select ${resultNames} from jsonb_to_recordset(?::jsonb) as v(${resultColumns})`,
      [JSON.stringify(inserts)],
    );
  await trx("submissions")
    .whereIn("id", [...new Set(submissionIds)])
    .update({ version: trx.raw("version + 1"), updated_at: trx.fn.now() });
  await recordAudits(trx, events);
  return submissionIds;
}

/**
 * Saves the lab results of one removed coupon into the contractor's open submission for
 * the site (created on first use). The server recomputes from the inputs; a result
 * with errors is not saved.
 */
export async function saveLabResult(
  conn: Knex,
  user: SessionUser,
  exposureId: string,
  lab: LabInputs,
  requestId?: string,
  /** The text as typed, kept for display; without it the numbers are shown as numbers. */
  text?: LabText,
): Promise<{ submissionId: string; result: CouponAssessment; unchanged: boolean }> {
  if (!can(user, "recordWork")) throw new Forbidden("Only contractor technicians enter lab results.");
  return conn.transaction(async (trx) => {
    const exposure = await exposureForLab(trx, user, exposureId);
    const settings = await ownerSettings(trx, exposure.ownerId);
    const entry = assessLabEntry(exposure, lab, text ?? labTextOf(lab), settings);
    if (entry.unchanged && exposure.draft)
      return { submissionId: exposure.draft.submissionId, result: entry.result, unchanged: true };
    const [submissionId] = await writeLabResults(trx, user, [entry], requestId);
    return { submissionId, result: entry.result, unchanged: false };
  });
}
