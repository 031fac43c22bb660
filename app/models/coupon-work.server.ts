import type { Knex } from "knex";
import type { SessionUser } from "../context";
import { evaluateCouponResult, type CouponGeometry, type CouponResult, type CouponResultInput } from "../domain/index.ts";
import { DUE_SOON_DAYS } from "../services/coupon-rules";
import type { Db } from "../services/db.server";
import { actorOf, recordAudit } from "./audit.server";
import { enqueueNotification } from "./notifications.server";
import { geometryOf, ownerSettings } from "./setup.server";
import { coveredSiteIds } from "./sites.server";

/**
 * Contractors' coupon work: the pull schedule, exchanges at a point (remove the coupon
 * in service, install the next), lab results, and the packets that carry them to the
 * owner. Every function takes the acting user and filters by their organisation in SQL.
 * A contractor works only at sites an active contract covers with the coupon-monitoring
 * scope; owner staff read everything of their own organisation.
 */

export class Forbidden extends Error {}
export class NotFound extends Error {}
export type FieldErrors = Record<string, string>;

export { DUE_SOON_DAYS };

// --------------------------------------------------------------------------- visibility

/**
 * Sites (with owner) where this user may read coupon work: all of the owner's sites for
 * owner staff; for a contractor, sites an active coupon-monitoring contract covers.
 */
export function visibleSites(conn: Db, user: SessionUser): Knex.QueryBuilder {
  if (user.organisation.kind === "owner") return conn("sites").where("owner_id", user.organisation.id).select("id");
  return coveredSiteIds(conn, user.organisation.id, "coupon_monitoring");
}

/** Whether a contractor has any live contract at the site, whatever its scope (for 403 vs 404). */
async function contractorSeesSite(conn: Db, user: SessionUser, siteId: string): Promise<boolean> {
  return Boolean(await coveredSiteIds(conn, user.organisation.id).where("cs.site_id", siteId).first());
}

// --------------------------------------------------------------------------- pull schedule

export type ScheduleRow = {
  pointId: string;
  pointTag: string;
  siteId: string;
  siteName: string;
  siteCode: string;
  timeZone: string;
  circuitTag: string;
  orientation: string;
  accessFitting: string;
  plannedExposureDays: number;
  exposureId: string | null;
  couponSerial: string | null;
  installedAt: string | null;
  daysInService: number | null;
  dueOn: string | null;
  daysToDue: number | null;
  state: "overdue" | "due" | "in service" | "empty";
};

export async function pullSchedule(conn: Db, user: SessionUser): Promise<ScheduleRow[]> {
  const result = await conn.raw(
    `select p.id as point_id, p.tag as point_tag, s.id as site_id, s.name as site_name, s.code as site_code,
            s.time_zone, c.tag as circuit_tag, p.orientation, p.access_fitting, p.planned_exposure_days,
            e.id as exposure_id, cp.serial as coupon_serial, e.installed_at,
            floor(extract(epoch from now() - e.installed_at) / 86400)::int as days_in_service,
            to_char((e.installed_at + make_interval(days => p.planned_exposure_days)) at time zone s.time_zone, 'YYYY-MM-DD') as due_on,
            ceil(extract(epoch from (e.installed_at + make_interval(days => p.planned_exposure_days)) - now()) / 86400)::int as days_to_due
       from monitoring_points p
       join circuits c on c.id = p.circuit_id
       join sites s on s.id = p.site_id
       left join coupon_exposures e on e.point_id = p.id and e.removed_at is null
       left join coupons cp on cp.id = e.coupon_id
      where p.active and p.kind = 'coupon' and p.site_id in (?)
      order by s.name, p.tag`,
    [visibleSites(conn, user)],
  );
  return result.rows.map((r: Record<string, any>) => ({
    pointId: r.point_id,
    pointTag: r.point_tag,
    siteId: r.site_id,
    siteName: r.site_name,
    siteCode: r.site_code,
    timeZone: r.time_zone,
    circuitTag: r.circuit_tag,
    orientation: r.orientation,
    accessFitting: r.access_fitting,
    plannedExposureDays: r.planned_exposure_days,
    exposureId: r.exposure_id,
    couponSerial: r.coupon_serial,
    installedAt: r.installed_at ? new Date(r.installed_at).toISOString() : null,
    daysInService: r.days_in_service,
    dueOn: r.due_on,
    daysToDue: r.days_to_due,
    state: !r.exposure_id ? "empty" : r.days_to_due < 0 ? "overdue" : r.days_to_due <= DUE_SOON_DAYS ? "due" : "in service",
  }));
}

/** Removed coupons whose lab results are not yet in a submitted or approved packet. */
export async function awaitingLab(conn: Db, user: SessionUser): Promise<Array<Record<string, any>>> {
  return conn("coupon_exposures as e")
    .join("monitoring_points as p", "p.id", "e.point_id")
    .join("sites as s", "s.id", "p.site_id")
    .join("coupons as cp", "cp.id", "e.coupon_id")
    .whereNotNull("e.removed_at")
    .whereIn("p.site_id", visibleSites(conn, user))
    .modify((q) => {
      if (user.organisation.kind === "contractor") q.where("e.removed_by_organisation_id", user.organisation.id);
    })
    .whereNotExists(
      conn("coupon_results as r")
        .join("submissions as sub", "sub.id", "r.submission_id")
        .whereRaw("r.exposure_id = e.id")
        .whereIn("sub.status", ["submitted", "approved"]),
    )
    .orderBy("e.removed_at")
    .select(
      "e.id as exposureId",
      "p.tag as pointTag",
      "s.name as siteName",
      "s.time_zone as timeZone",
      "cp.serial as couponSerial",
      "e.removed_at as removedAt",
      conn.raw(
        "exists (select 1 from coupon_results r join submissions sub on sub.id = r.submission_id where r.exposure_id = e.id and sub.status in ('draft','returned')) as has_draft",
      ),
    );
}

// --------------------------------------------------------------------------- a point, for work

export type PointForWork = {
  id: string;
  tag: string;
  ownerId: string;
  siteId: string;
  siteName: string;
  timeZone: string;
  circuitTag: string;
  materialCode: string;
  orientation: string;
  accessFitting: string;
  mounting: string;
  plannedExposureDays: number;
  current: null | { exposureId: string; couponSerial: string; installedAt: string };
};

/**
 * The point if the user may record coupon work there. Owner staff and contractors
 * without any contract at the site get NotFound (existence stays hidden); a contractor
 * with a contract of another scope gets Forbidden.
 */
export async function pointForWork(conn: Db, user: SessionUser, pointId: string): Promise<PointForWork> {
  if (user.role !== "contractor_technician") throw new Forbidden("Only contractor technicians record coupon exchanges.");
  const p = await conn("monitoring_points as p")
    .join("sites as s", "s.id", "p.site_id")
    .join("circuits as c", "c.id", "p.circuit_id")
    .where("p.id", pointId)
    .first(
      "p.id",
      "p.tag",
      "p.owner_id",
      "p.site_id",
      "s.name as site_name",
      "s.time_zone",
      "c.tag as circuit_tag",
      "c.material_code",
      "p.orientation",
      "p.access_fitting",
      "p.mounting",
      "p.planned_exposure_days",
      "p.active",
    );
  if (!p || !(await contractorSeesSite(conn, user, p.site_id))) throw new NotFound();
  const allowed = await coveredSiteIds(conn, user.organisation.id, "coupon_monitoring").where("cs.site_id", p.site_id).first();
  if (!allowed) throw new Forbidden("Your company's contract at this site does not cover coupon monitoring.");
  if (!p.active) throw new Forbidden("This monitoring point is out of use; ask the owner's engineer.");
  const cur = await conn("coupon_exposures as e")
    .join("coupons as cp", "cp.id", "e.coupon_id")
    .where("e.point_id", pointId)
    .whereNull("e.removed_at")
    .first("e.id", "cp.serial", "e.installed_at");
  return {
    id: p.id,
    tag: p.tag,
    ownerId: p.owner_id,
    siteId: p.site_id,
    siteName: p.site_name,
    timeZone: p.time_zone,
    circuitTag: p.circuit_tag,
    materialCode: p.material_code,
    orientation: p.orientation,
    accessFitting: p.access_fitting,
    mounting: p.mounting,
    plannedExposureDays: p.planned_exposure_days,
    current: cur ? { exposureId: cur.id, couponSerial: cur.serial, installedAt: new Date(cur.installed_at).toISOString() } : null,
  };
}

/** Coupons of the owner still in stock (never exposed), for the "install next" choice. */
export async function couponsInStock(conn: Db, ownerId: string) {
  return conn("coupons as c")
    .where("c.owner_id", ownerId)
    .whereNotExists(conn("coupon_exposures as e").whereRaw("e.coupon_id = c.id"))
    .orderBy("c.serial")
    .select("c.serial", "c.material_code as materialCode", "c.shape");
}

export type ExchangeInput = {
  /** ISO instants (already converted from the site's wall-clock time). */
  removedAt?: string | null;
  deposits?: string;
  pittingVisible?: boolean | null;
  damage?: string;
  notes?: string;
  installSerial?: string | null;
  installedAt?: string | null;
};

/**
 * Removes the coupon in service and/or installs the next one, in one transaction.
 * Returns field errors (nothing written) or the ids touched.
 */
export async function recordExchange(
  conn: Knex,
  user: SessionUser,
  pointId: string,
  input: ExchangeInput,
  requestId?: string,
): Promise<{ ok: true; removedExposureId: string | null; installedExposureId: string | null } | { ok: false; errors: FieldErrors }> {
  return conn.transaction(async (trx) => {
    const point = await pointForWork(trx, user, pointId);
    // Lock the point's exposures so two technicians cannot exchange at once.
    await trx.raw("select id from monitoring_points where id = ? for update", [pointId]);
    const errors: FieldErrors = {};
    const now = Date.now() + 5 * 60_000; // tolerate a few minutes of clock difference
    const current = await trx("coupon_exposures").where({ point_id: pointId }).whereNull("removed_at").first("id", "installed_at", "coupon_id");
    if (!current && input.removedAt) errors.removedAt = "No coupon is in service at this point, so there is nothing to remove.";
    if (current && !input.removedAt && input.installSerial)
      errors.removedAt = "A coupon is still in service here: record its removal before installing the next one.";
    if (!input.removedAt && !input.installSerial) errors.form = "Record a removal, an installation, or both.";
    if (current && input.removedAt) {
      const removed = Date.parse(input.removedAt);
      if (!Number.isFinite(removed)) errors.removedAt = "Enter the removal date and time.";
      else if (removed <= new Date(current.installed_at).getTime())
        errors.removedAt = "The removal must be after the coupon was installed.";
      else if (removed > now) errors.removedAt = "The removal time is in the future.";
    }
    let coupon: { id: string } | undefined;
    if (input.installSerial) {
      coupon = await trx("coupons").where({ owner_id: point.ownerId, serial: input.installSerial.trim() }).first("id");
      if (!coupon) errors.installSerial = `There is no coupon ${input.installSerial} in the owner's stock.`;
      else if (await trx("coupon_exposures").where({ coupon_id: coupon.id }).first("id"))
        errors.installSerial = `Coupon ${input.installSerial} has already been exposed; every coupon is used once.`;
      const installed = input.installedAt ? Date.parse(input.installedAt) : NaN;
      if (!Number.isFinite(installed)) errors.installedAt = "Enter the installation date and time.";
      else if (installed > now) errors.installedAt = "The installation time is in the future.";
      else if (input.removedAt && installed < Date.parse(input.removedAt))
        errors.installedAt = "The next coupon cannot go in before the previous one came out.";
      else if (!current) {
        const last = await trx("coupon_exposures").where({ point_id: pointId }).max({ at: "removed_at" }).first();
        if (last?.at && installed < new Date(last.at).getTime())
          errors.installedAt = "This is before the last coupon at this point was removed.";
      }
    }
    if (Object.keys(errors).length) return { ok: false as const, errors };

    const actor = actorOf(user);
    let removedExposureId: string | null = null;
    if (current && input.removedAt) {
      const after = {
        removed_at: input.removedAt,
        removed_by: user.id,
        removed_by_organisation_id: user.organisation.id,
        deposits: input.deposits?.trim() ?? "",
        pitting_visible: input.pittingVisible ?? null,
        damage: input.damage?.trim() ?? "",
        notes: input.notes?.trim() ?? "",
        updated_at: trx.fn.now(),
      };
      await trx("coupon_exposures").where({ id: current.id }).update(after);
      removedExposureId = current.id;
      await recordAudit(trx, {
        ownerId: point.ownerId,
        actor,
        action: "coupon.removed",
        recordType: "coupon_exposure",
        recordId: current.id,
        before: { removed_at: null },
        after: { ...after, updated_at: undefined, point: point.tag },
        requestId,
      });
    }
    let installedExposureId: string | null = null;
    if (coupon && input.installedAt) {
      const [row] = await trx("coupon_exposures")
        .insert({
          owner_id: point.ownerId,
          point_id: pointId,
          coupon_id: coupon.id,
          installed_at: input.installedAt,
          installed_by: user.id,
          installed_by_organisation_id: user.organisation.id,
        })
        .returning("id");
      installedExposureId = row.id;
      await recordAudit(trx, {
        ownerId: point.ownerId,
        actor,
        action: "coupon.installed",
        recordType: "coupon_exposure",
        recordId: row.id,
        after: { point: point.tag, coupon: input.installSerial, installed_at: input.installedAt },
        requestId,
      });
    }
    return { ok: true as const, removedExposureId, installedExposureId };
  });
}

// --------------------------------------------------------------------------- lab results

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
  /** The result already entered in an open (draft or returned) packet, if any. */
  draft: null | { submissionId: string; reference: string; status: string; inputs: LabInputs; labNotes: string; cleaningMethod: string };
  locked: null | { reference: string; status: string };
};

/** What the technician types on the lab form (masses g, depths mm). */
export type LabInputs = {
  cleaningMethod: string;
  couponMassesG: number[];
  finalMassG: number | null;
  blankInitialMassG: number | null;
  blankMassesG: number[];
  baseMetalFromCycle: number | null;
  pitDepthsMm: number[];
  labNotes: string;
};

export async function exposureForLab(conn: Db, user: SessionUser, exposureId: string): Promise<ExposureForLab> {
  const row = await conn("coupon_exposures as e")
    .join("monitoring_points as p", "p.id", "e.point_id")
    .join("circuits as ci", "ci.id", "p.circuit_id")
    .join("sites as s", "s.id", "p.site_id")
    .join("coupons as c", "c.id", "e.coupon_id")
    .where("e.id", exposureId)
    .whereIn("p.site_id", visibleSites(conn, user))
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
  if (!row || !row.removed_at) throw new NotFound();
  const results = await conn("coupon_results as r")
    .join("submissions as sub", "sub.id", "r.submission_id")
    .where("r.exposure_id", exposureId)
    .whereNot("sub.status", "superseded")
    .orderBy("sub.created_at", "desc")
    .select("sub.id", "sub.reference", "sub.status", "r.inputs", "r.lab_notes", "r.cleaning_method");
  const open = results.find((r: any) => r.status === "draft" || r.status === "returned");
  const historyMmPerYear = await approvedRatesAtPoint(conn, exposureId);
  // An open packet (a returned one, or a correction of an approved one) takes precedence.
  const locked = open ? undefined : results.find((r: any) => r.status === "submitted" || r.status === "approved");
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
    draft: open
      ? { submissionId: open.id, reference: open.reference, status: open.status, inputs: open.inputs.lab as LabInputs, labNotes: open.lab_notes, cleaningMethod: open.cleaning_method }
      : null,
    locked: locked ? { reference: locked.reference, status: locked.status } : null,
  };
}

/**
 * General rates (mm/y) of the approved, not superseded, results at the same point as
 * this exposure, removed before it: the history a new result is compared with.
 */
export async function approvedRatesAtPoint(conn: Db, exposureId: string): Promise<number[]> {
  const { rows } = await conn.raw(
    `select (r.computed->'rate'->>'mmPerYear')::float8 as rate
       from coupon_exposures this
       join coupon_exposures e on e.point_id = this.point_id and e.id <> this.id and e.removed_at < this.removed_at
       join coupon_results r on r.exposure_id = e.id
       join submissions s on s.id = r.submission_id and s.status = 'approved'
      where this.id = ?
      order by e.removed_at desc
      limit 6`,
    [exposureId],
  );
  return rows.map((r: { rate: number }) => r.rate);
}

/** The calculation input for an exposure and the lab's numbers, with the owner's thresholds. */
export function calculationInput(
  exposure: Pick<ExposureForLab, "coupon" | "installedAt" | "removedAt" | "pittingVisible" | "historyMmPerYear">,
  lab: LabInputs,
  settings: Awaited<ReturnType<typeof ownerSettings>>,
): CouponResultInput {
  return {
    geometry: exposure.coupon.geometry,
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
    minimumExposureDays: settings.minimumExposureDays,
    historyMmPerYear: exposure.historyMmPerYear,
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

async function nextReference(trx: Db, siteId: string): Promise<string> {
  const site = await trx("sites").where({ id: siteId }).first("code");
  const { rows } = await trx.raw("select nextval('submission_number_seq') as n");
  return `${site.code}-CP-${String(rows[0].n).padStart(5, "0")}`;
}

/**
 * Saves the lab results of one removed coupon into the contractor's open packet for
 * the site (created on first use). The server recomputes from the inputs; a result
 * with errors is not saved.
 */
export async function saveLabResult(
  conn: Knex,
  user: SessionUser,
  exposureId: string,
  lab: LabInputs,
  requestId?: string,
): Promise<{ ok: true; submissionId: string; result: CouponResult; unchanged?: boolean } | { ok: false; errors: FieldErrors }> {
  if (user.role !== "contractor_technician") throw new Forbidden("Only contractor technicians enter lab results.");
  return conn.transaction(async (trx) => {
    const exposure = await exposureForLab(trx, user, exposureId);
    if (exposure.locked) {
      return { ok: false as const, errors: { form: `These results are already in packet ${exposure.locked.reference} (${exposure.locked.status}).` } };
    }
    const settings = await ownerSettings(trx, exposure.ownerId);
    const input = calculationInput(exposure, lab, settings);
    const outcome = evaluateCouponResult(input);
    if (!outcome.ok) return { ok: false as const, errors: outcome.errors };
    const { result } = outcome;
    // Saving the same numbers again (a repeated CSV import, a double click) changes nothing.
    if (exposure.draft && sameLab(exposure.draft.inputs, lab)) {
      return { ok: true as const, submissionId: exposure.draft.submissionId, result, unchanged: true };
    }

    let submissionId = exposure.draft?.submissionId;
    if (!submissionId) {
      const open = await trx("submissions")
        .where({ owner_id: exposure.ownerId, site_id: exposure.siteId, contractor_id: user.organisation.id, kind: "coupon", status: "draft" })
        .forUpdate()
        .first("id");
      submissionId = open?.id;
    }
    if (!submissionId) {
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
        .returning(["id", "reference"]);
      submissionId = created.id as string;
      await recordAudit(trx, {
        ownerId: exposure.ownerId,
        actor: actorOf(user),
        action: "submission.created",
        recordType: "submission",
        recordId: submissionId,
        after: { reference: created.reference, status: "draft", kind: "coupon" },
        requestId,
      });
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
      inputs: JSON.stringify({ calculation: input, lab }),
      computed: JSON.stringify(result),
      flags: JSON.stringify(result.flags),
      general_severity: result.severity.general,
      pitting_severity: result.severity.pitting,
      updated_at: trx.fn.now(),
    };
    const before = await trx("coupon_results").where({ submission_id: submissionId, exposure_id: exposureId }).first("id", "inputs");
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
      after: { coupon: exposure.coupon.serial, lab, mmPerYear: result.rate.mmPerYear, worst: result.severity.worst },
      requestId,
    });
    return { ok: true as const, submissionId, result, unchanged: false };
  });
}

// --------------------------------------------------------------------------- packets

export type PacketSummary = {
  id: string;
  reference: string;
  kind: "coupon";
  status: string;
  revision: number;
  version: number;
  siteId: string;
  siteName: string;
  siteCode: string;
  timeZone: string;
  ownerId: string;
  ownerName: string;
  contractorId: string;
  contractorName: string;
  resultCount: number;
  worstSeverity: string | null;
  flagCount: number;
  createdAt: string;
  submittedAt: string | null;
  decidedAt: string | null;
  decisionComment: string | null;
};

/**
 * The packets a user may read: owner staff see their organisation's packets once
 * submitted (drafts stay with the contractor); a contractor sees its own packets at
 * sites an active coupon-monitoring contract covers.
 */
export function packetsQuery(conn: Db, user: SessionUser): Knex.QueryBuilder {
  const q = conn("submissions as sub")
    .join("sites as s", "s.id", "sub.site_id")
    .join("organisations as o", "o.id", "sub.owner_id")
    .join("organisations as k", "k.id", "sub.contractor_id");
  if (user.organisation.kind === "owner") q.where("sub.owner_id", user.organisation.id).whereNot("sub.status", "draft");
  else q.where("sub.contractor_id", user.organisation.id).whereIn("sub.site_id", visibleSites(conn, user));
  return q;
}

const packetColumns = (conn: Db) => [
  "sub.id",
  "sub.reference",
  "sub.kind",
  "sub.status",
  "sub.revision",
  "sub.version",
  "sub.site_id",
  "s.name as site_name",
  "s.code as site_code",
  "s.time_zone",
  "sub.owner_id",
  "o.name as owner_name",
  "sub.contractor_id",
  "k.name as contractor_name",
  conn.raw("(select count(*)::int from coupon_results r where r.submission_id = sub.id) as result_count"),
  "sub.worst_severity",
  "sub.flag_count",
  "sub.created_at",
  "sub.submitted_at",
  "sub.decided_at",
  "sub.decision_comment",
];

export function toPacketSummary(r: Record<string, any>): PacketSummary {
  const iso = (v: unknown) => (v ? new Date(v as string).toISOString() : null);
  return {
    id: r.id,
    reference: r.reference,
    kind: r.kind,
    status: r.status,
    revision: r.revision,
    version: r.version,
    siteId: r.site_id,
    siteName: r.site_name,
    siteCode: r.site_code,
    timeZone: r.time_zone,
    ownerId: r.owner_id,
    ownerName: r.owner_name,
    contractorId: r.contractor_id,
    contractorName: r.contractor_name,
    resultCount: r.result_count,
    worstSeverity: r.worst_severity,
    flagCount: r.flag_count,
    createdAt: iso(r.created_at)!,
    submittedAt: iso(r.submitted_at),
    decidedAt: iso(r.decided_at),
    decisionComment: r.decision_comment,
  };
}

export type PacketFilters = {
  siteId?: string;
  status?: string;
  kind?: string;
  contractorId?: string;
  worstSeverity?: string;
  /** true: only packets carrying quality flags; false: only clean ones. */
  flagged?: boolean;
  order?: "newest" | "oldest";
};

/**
 * Keyset pagination over the time a packet was submitted (or started, for drafts):
 * the cursor is "<ISO time>|<id>". Newest first by default; the review queue reads
 * oldest first.
 */
export async function listPackets(
  conn: Db,
  user: SessionUser,
  filters: PacketFilters,
  page: { limit: number; cursor?: { createdAt: string; id: string } },
): Promise<{ items: PacketSummary[]; nextCursor: string | null }> {
  const sortKey = "coalesce(sub.submitted_at, sub.created_at)";
  const q = packetsQuery(conn, user).select([...packetColumns(conn), conn.raw(`${sortKey} as sort_at`)]);
  if (filters.siteId) q.where("sub.site_id", filters.siteId);
  if (filters.status) q.where("sub.status", filters.status);
  if (filters.kind) q.where("sub.kind", filters.kind);
  if (filters.contractorId) q.where("sub.contractor_id", filters.contractorId);
  if (filters.worstSeverity) q.where("sub.worst_severity", filters.worstSeverity);
  if (filters.flagged === true) q.where("sub.flag_count", ">", 0);
  if (filters.flagged === false) q.where("sub.flag_count", 0);
  const oldest = filters.order === "oldest";
  if (page.cursor) {
    q.whereRaw(`(${sortKey}, sub.id) ${oldest ? ">" : "<"} (?::timestamptz, ?::uuid)`, [page.cursor.createdAt, page.cursor.id]);
  }
  const dir = oldest ? "asc" : "desc";
  const rows = await q.orderByRaw(`${sortKey} ${dir}, sub.id ${dir}`).limit(page.limit + 1);
  const items = rows.slice(0, page.limit).map(toPacketSummary);
  const lastRow = rows.length > page.limit ? rows[page.limit - 1] : undefined;
  return { items, nextCursor: lastRow ? `${new Date(lastRow.sort_at).toISOString()}|${lastRow.id}` : null };
}

export type PacketResult = {
  id: string;
  exposureId: string;
  couponSerial: string;
  pointTag: string;
  circuitTag: string;
  installedAt: string;
  removedAt: string;
  cleaningMethod: string;
  labNotes: string;
  inputs: { calculation: CouponResultInput; lab: LabInputs };
  computed: CouponResult;
  generalSeverity: string | null;
  pittingSeverity: string | null;
};

export async function getPacket(conn: Db, user: SessionUser, id: string): Promise<{ packet: PacketSummary; results: PacketResult[] }> {
  const row = await packetsQuery(conn, user).where("sub.id", id).first(packetColumns(conn));
  if (!row) throw new NotFound();
  const results = await conn("coupon_results as r")
    .join("coupon_exposures as e", "e.id", "r.exposure_id")
    .join("coupons as c", "c.id", "e.coupon_id")
    .join("monitoring_points as p", "p.id", "e.point_id")
    .join("circuits as ci", "ci.id", "p.circuit_id")
    .where("r.submission_id", id)
    .orderBy("p.tag")
    .select(
      "r.id",
      "r.exposure_id",
      "c.serial",
      "p.tag as point_tag",
      "ci.tag as circuit_tag",
      "e.installed_at",
      "e.removed_at",
      "r.cleaning_method",
      "r.lab_notes",
      "r.inputs",
      "r.computed",
      "r.general_severity",
      "r.pitting_severity",
    );
  return {
    packet: toPacketSummary(row),
    results: results.map((r: Record<string, any>) => ({
      id: r.id,
      exposureId: r.exposure_id,
      couponSerial: r.serial,
      pointTag: r.point_tag,
      circuitTag: r.circuit_tag,
      installedAt: new Date(r.installed_at).toISOString(),
      removedAt: new Date(r.removed_at).toISOString(),
      cleaningMethod: r.cleaning_method,
      labNotes: r.lab_notes,
      inputs: r.inputs,
      computed: r.computed,
      generalSeverity: r.general_severity,
      pittingSeverity: r.pitting_severity,
    })),
  };
}

const severityRank = { low: 0, moderate: 1, high: 2, severe: 3 } as const;

/**
 * Submits a draft (or returned) packet: every result is recomputed from its stored
 * inputs with the owner's current thresholds; a packet with errors is refused whole.
 * Quality flags travel with it.
 */
export async function submitPacket(
  conn: Knex,
  user: SessionUser,
  submissionId: string,
  requestId?: string,
): Promise<{ ok: true; reference: string } | { ok: false; errors: FieldErrors }> {
  if (user.role !== "contractor_technician") throw new Forbidden("Only the contractor's technicians submit packets.");
  return conn.transaction(async (trx) => {
    const { packet, results } = await getPacket(trx, user, submissionId);
    await trx.raw("select id from submissions where id = ? for update", [submissionId]);
    if (packet.status !== "draft" && packet.status !== "returned") {
      return { ok: false as const, errors: { form: `Packet ${packet.reference} is ${packet.status}; only a draft or returned packet can be submitted.` } };
    }
    if (results.length === 0) return { ok: false as const, errors: { form: "The packet has no results yet." } };
    const settings = await ownerSettings(trx, packet.ownerId);
    const errors: FieldErrors = {};
    let worst: keyof typeof severityRank = "low";
    let flagCount = 0;
    for (const r of results) {
      const input = {
        ...r.inputs.calculation,
        generalThresholds: settings.generalThresholds,
        pittingThresholds: settings.pittingThresholds,
        minimumExposureDays: settings.minimumExposureDays,
        historyMmPerYear: await approvedRatesAtPoint(trx, r.exposureId),
      };
      const outcome = evaluateCouponResult(input);
      if (!outcome.ok) {
        errors[r.couponSerial] = Object.values(outcome.errors).join(" ");
        continue;
      }
      const res = outcome.result;
      if (severityRank[res.severity.worst] > severityRank[worst]) worst = res.severity.worst;
      flagCount += res.flags.length;
      await trx("coupon_results")
        .where({ id: r.id })
        .update({
          inputs: JSON.stringify({ calculation: input, lab: r.inputs.lab }),
          computed: JSON.stringify(res),
          flags: JSON.stringify(res.flags),
          general_severity: res.severity.general,
          pitting_severity: res.severity.pitting,
          updated_at: trx.fn.now(),
        });
    }
    if (Object.keys(errors).length) return { ok: false as const, errors };
    // A returned packet (or an opened correction) comes back as the next revision.
    const revision = packet.status === "returned" && (await trx("submission_revisions").where({ submission_id: submissionId, revision: packet.revision }).first("revision"))
      ? packet.revision + 1
      : packet.revision;
    const [updated] = await trx("submissions")
      .where({ id: submissionId })
      .update({
        status: "submitted",
        revision,
        submitted_at: trx.fn.now(),
        submitted_by: user.id,
        worst_severity: worst,
        flag_count: flagCount,
        version: trx.raw("version + 1"),
        updated_at: trx.fn.now(),
      })
      .returning(["submitted_at"]);
    const snapshot = await trx("coupon_results").where({ submission_id: submissionId }).select("exposure_id", "inputs", "computed");
    await trx("submission_revisions").insert({
      submission_id: submissionId,
      revision,
      submitted_at: updated.submitted_at,
      submitted_by: user.id,
      results: JSON.stringify(snapshot),
    });
    await recordAudit(trx, {
      ownerId: packet.ownerId,
      actor: actorOf(user),
      action: "submission.submitted",
      recordType: "submission",
      recordId: submissionId,
      before: { status: packet.status },
      after: { status: "submitted", revision, results: results.length, worst_severity: worst, flags: flagCount },
      requestId,
    });
    await enqueueNotification(trx, { kind: "submission.submitted", submissionId });
    return { ok: true as const, reference: packet.reference };
  });
}

