import type { Knex } from "knex";
import type { SessionUser } from "../context";
import { assessCoupon, type CouponGeometry, type CouponAssessment, type CouponResultInput } from "../domain/index.ts";
import { geometryOf } from "../services/coupon-spec";
import { labTextOf, type LabInputs, type LabText } from "../services/lab-spec";
import type { Db } from "../services/db.server";
import { Conflict, Forbidden, Invalid, NotFoundInTenant } from "../services/outcome";
import { can } from "../services/permissions";
import { actorOf, recordAudit } from "./audit.server";
import { couponWorkSiteIds } from "./contract-coverage.server";
import { ownerSettings } from "./owner-settings.server";
import { nextReference } from "./submission-references.server";

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
  const row = await conn("coupon_exposures as e")
    .join("monitoring_points as p", "p.id", "e.point_id")
    .join("circuits as ci", "ci.id", "p.circuit_id")
    .join("sites as s", "s.id", "p.site_id")
    .join("coupons as c", "c.id", "e.coupon_id")
    .where("e.id", exposureId)
    .whereIn("p.site_id", couponWorkSiteIds(conn, user))
    .modify((q) => {
      if (user.organisation.kind === "contractor") q.where("e.removed_by_organisation_id", user.organisation.id);
    })
    .first(
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
  if (!row || !row.removed_at) throw new NotFoundInTenant("removed coupon");
  const results: Array<{
    id: string;
    reference: string;
    status: string;
    inputs: { calculation: CouponResultInput; lab: LabInputs; text?: LabText };
    lab_notes: string;
    cleaning_method: string;
    decision_comment: string | null;
  }> = await conn("coupon_results as r")
    .join("submissions as sub", "sub.id", "r.submission_id")
    .where("r.exposure_id", exposureId)
    .whereNot("sub.status", "superseded")
    .orderBy("sub.created_at", "desc")
    .select(
      "sub.id",
      "sub.reference",
      "sub.status",
      "r.inputs",
      "r.lab_notes",
      "r.cleaning_method",
      "sub.decision_comment",
    );
  const open = results.find((r) => r.status === "draft" || r.status === "returned");
  const historyMmPerYear = await approvedRatesAtPoint(conn, exposureId);
  const pittingHistoryMmPerYear = await approvedRatesAtPoint(conn, exposureId, "pitting");
  // An open submission (a returned one, or a correction of an approved one) takes precedence.
  const locked = open ? undefined : results.find((r) => r.status === "submitted" || r.status === "approved");
  return {
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
    historyMmPerYear,
    pittingHistoryMmPerYear,
    draft: open
      ? {
          submissionId: open.id,
          reference: open.reference,
          status: open.status,
          inputs: open.inputs.lab as LabInputs,
          text: open.inputs.text ?? labTextOf(open.inputs.lab as LabInputs),
          labNotes: open.lab_notes,
          cleaningMethod: open.cleaning_method,
          returnComment: open.status === "returned" ? open.decision_comment : null,
        }
      : null,
    locked: locked ? { reference: locked.reference, status: locked.status } : null,
  };
}

/**
 * General rates (mm/y) of the approved, not superseded, results at the same point as
 * this exposure, removed before it: the history a new result is compared with.
 */
/**
 * `approvedRatesAtPoint` for many exposures in one query: for each, the general and the
 * pitting rates of the point's approved earlier coupons (newest first, six at most).
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

export async function approvedRatesAtPoint(
  conn: Db,
  exposureId: string,
  kind: "general" | "pitting" = "general",
): Promise<number[]> {
  const { rows } = await conn.raw<{ rows: Array<{ rate: number }> }>(
    `select (r.computed -> ? ->> 'mmPerYear')::float8 as rate
       from coupon_exposures this
       join coupon_exposures e on e.point_id = this.point_id and e.id <> this.id and e.removed_at < this.removed_at
       join coupon_results r on r.exposure_id = e.id
       join submissions s on s.id = r.submission_id and s.status = 'approved'
      where this.id = ? and r.computed -> ? ->> 'mmPerYear' is not null
      order by e.removed_at desc
      limit 6`,
    [kind === "general" ? "rate" : "pitting", exposureId, kind === "general" ? "rate" : "pitting"],
  );
  return rows.map((r) => r.rate);
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
    if (exposure.locked) {
      throw new Conflict(
        `These results are already in submission ${exposure.locked.reference} (${exposure.locked.status}).`,
      );
    }
    const settings = await ownerSettings(trx, exposure.ownerId);
    const input = calculationInput(exposure, lab, settings);
    const outcome = assessCoupon(input);
    if (!outcome.ok) throw new Invalid(outcome.errors);
    const { result } = outcome;
    // Saving the same numbers again (a repeated CSV import, a double click) changes nothing.
    const typed = text ?? labTextOf(lab);
    if (exposure.draft && sameLab(exposure.draft.inputs, lab) && sameText(exposure.draft.text, typed)) {
      return { submissionId: exposure.draft.submissionId, result, unchanged: true };
    }

    let submissionId = exposure.draft?.submissionId;
    const openDraft = () =>
      trx("submissions")
        .where({
          owner_id: exposure.ownerId,
          site_id: exposure.siteId,
          contractor_id: user.organisation.id,
          kind: "coupon",
          status: "draft",
        })
        .forUpdate()
        .first("id");
    if (!submissionId) submissionId = (await openDraft())?.id;
    if (!submissionId) {
      // One open draft per contractor, site and kind (unique index submissions_one_open_draft):
      // when another save created it since the read above, this one joins it.
      const [created] = await trx("submissions")
        .insert({
          owner_id: exposure.ownerId,
          site_id: exposure.siteId,
          contractor_id: user.organisation.id,
          kind: "coupon",
          status: "draft",
          reference: await nextReference(trx, exposure.siteId),
          created_by: user.id,
        })
        .onConflict(trx.raw("(contractor_id, site_id, kind) where status = 'draft'"))
        .ignore()
        .returning(["id", "reference"]);
      if (created) {
        submissionId = created.id as string;
        await recordAudit(trx, {
          ownerId: exposure.ownerId,
          actor: actorOf(user),
          action: "submission.created",
          recordType: "submission",
          recordId: created.id,
          after: { reference: created.reference, status: "draft", kind: "coupon" },
          requestId,
        });
      } else submissionId = (await openDraft())?.id;
      if (!submissionId) throw new Conflict("The open draft changed while saving; save the results again.");
    }
    const values = {
      submission_id: submissionId,
      exposure_id: exposureId,
      cleaning_method: lab.cleaningMethod.trim(),
      coupon_masses_g: lab.couponMassesG,
      blank_initial_mass_g: lab.blankInitialMassG,
      blank_masses_g: lab.blankMassesG,
      base_metal_from_cycle: lab.baseMetalFromCycle,
      final_mass_g: lab.couponMassesG.length ? null : lab.finalMassG,
      pit_depths_mm: lab.pitDepthsMm,
      lab_notes: lab.labNotes.trim(),
      inputs: JSON.stringify({ calculation: input, lab, text: typed }),
      computed: JSON.stringify(result),
      flags: JSON.stringify(result.flags),
      general_severity: result.severity.general,
      pitting_severity: result.severity.pitting,
      updated_at: trx.fn.now(),
    };
    const before = await trx("coupon_results")
      .where({ submission_id: submissionId, exposure_id: exposureId })
      .first("id", "inputs");
    if (before) await trx("coupon_results").where({ id: before.id }).update(values);
    else await trx("coupon_results").insert(values);
    await trx("submissions").where({ id: submissionId }).increment("version", 1).update({ updated_at: trx.fn.now() });
    await recordAudit(trx, {
      ownerId: exposure.ownerId,
      actor: actorOf(user),
      action: before ? "lab_result.edited" : "lab_result.entered",
      recordType: "submission",
      recordId: submissionId,
      before: before ? { lab: before.inputs.lab } : undefined,
      after: {
        coupon: exposure.coupon.serial,
        lab,
        mmPerYear: result.rate?.mmPerYear ?? null,
        worst: result.severity.worst,
      },
      requestId,
    });
    return { submissionId, result, unchanged: false };
  });
}
