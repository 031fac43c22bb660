import type { Reader } from "../context";
import type { Db } from "../services/db.server";
import { isUuid } from "../services/ids";
import { NotFoundInTenant } from "../services/outcome";
import { effectiveBaseline, type EffectiveBaseline } from "../services/cml-spec";
import { ownerOf } from "./circuit-life.server";

/**
 * What a circuit's remaining life was computed from, as history for charts, reports and
 * downloads: every CML's approved readings (with the submission each came from), its
 * base-line and component replacements, the approved coupon results at the circuit's
 * points over time, and the approved submissions that fed either. Owner staff only; another
 * owner's circuit, a contractor or a malformed id is a 404.
 *
 * Four queries whatever the size of the circuit. Superseded submissions are left out (their
 * correction is the approved one).
 */

export type HistoryReading = {
  id: string;
  measuredOn: string;
  thicknessMm: number;
  quadrantReadingsMm: number[];
  method: string;
  instrument: string;
  instrumentResolutionMm: number | null;
  technician: string;
  submissionId: string;
  reference: string;
};

export type HistoryCml = {
  id: string;
  tag: string;
  location: string;
  component: string;
  injectionPoint: boolean;
  retired: boolean;
  /** The base-line of the current component (the latest replacement's, else the CML's own). */
  baseline: EffectiveBaseline;
  replacements: Array<{ replacedOn: string; baselineThicknessMm: number | null; reason: string }>;
  /** Every approved reading, oldest first, including those before the latest replacement. */
  readings: HistoryReading[];
};

export type HistoryCoupon = {
  resultId: string;
  serial: string;
  materialCode: string;
  pointId: string;
  pointTag: string;
  /** The site's calendar day the coupon was removed. */
  removedOn: string;
  determinable: boolean;
  generalMmPerYear: number | null;
  pittingMmPerYear: number | null;
  generalSeverity: string | null;
  pittingSeverity: string | null;
  submissionId: string;
  reference: string;
};

export type HistorySubmission = {
  id: string;
  reference: string;
  kind: "coupon" | "thickness";
  contractorName: string;
  decidedAt: string | null;
  /** Readings (thickness) or coupon results (coupon) of this circuit in it. */
  count: number;
};

export type CircuitHistory = {
  circuitId: string;
  circuitTag: string;
  materialCode: string;
  timeZone: string;
  cmls: HistoryCml[];
  coupons: HistoryCoupon[];
  submissions: HistorySubmission[];
};

type CmlRow = {
  id: string;
  tag: string;
  location: string;
  component: string;
  injection_point: boolean;
  retired: boolean;
  baseline_thickness_mm: string | null;
  baseline_on: string | null;
  replacements: Array<{ replaced_on: string; baseline_thickness_mm: number | null; reason: string }>;
};

type ReadingRow = {
  id: string;
  cml_id: string;
  measured_on: string;
  thickness_mm: string;
  quadrant_readings_mm: string[];
  method: string;
  instrument: string;
  instrument_resolution_mm: string | null;
  technician: string;
  submission_id: string;
  reference: string;
};

type CouponRow = {
  result_id: string;
  serial: string;
  material_code: string;
  point_id: string;
  point_tag: string;
  removed_on: string;
  determinable: boolean | null;
  general_mm_y: number | null;
  pitting_mm_y: number | null;
  general_severity: string | null;
  pitting_severity: string | null;
  submission_id: string;
  reference: string;
};

const num = (v: string | number | null) => (v === null ? null : Number(v));

export async function circuitHistory(conn: Db, user: Reader, circuitId: string): Promise<CircuitHistory> {
  const ownerId = ownerOf(user);
  if (!isUuid(circuitId)) throw new NotFoundInTenant("circuit");
  const circuit:
    | {
        id: string;
        tag: string;
        material_code: string;
        time_zone: string;
        nominal_wall_mm: string | null;
        mill_tolerance_pct: string | null;
      }
    | undefined = await conn("circuits as c")
    .join("sites as s", "s.id", "c.site_id")
    .where({ "c.id": circuitId, "s.owner_id": ownerId })
    .first("c.id", "c.tag", "c.material_code", "s.time_zone", "c.nominal_wall_mm", "c.mill_tolerance_pct");
  if (!circuit) throw new NotFoundInTenant("circuit");

  const { rows: cmlRows } = await conn.raw<{ rows: CmlRow[] }>(
    `select m.id, m.tag, m.location, m.component, m.injection_point, m.retired_at is not null as retired,
            coalesce(r.last ->> 'baseline_thickness_mm', m.baseline_thickness_mm::text) as baseline_thickness_mm,
            coalesce(r.last ->> 'replaced_on', to_char(m.baseline_on, 'YYYY-MM-DD')) as baseline_on,
            coalesce(r.all, '[]'::jsonb) as replacements
       from cmls m
       left join lateral (
         select jsonb_agg(jsonb_build_object('replaced_on', to_char(x.replaced_on, 'YYYY-MM-DD'),
                                             'baseline_thickness_mm', x.baseline_thickness_mm::float8,
                                             'reason', x.reason) order by x.replaced_on) as all,
                (array_agg(jsonb_build_object('replaced_on', to_char(x.replaced_on, 'YYYY-MM-DD'),
                                              'baseline_thickness_mm', x.baseline_thickness_mm::text)
                           order by x.replaced_on desc))[1] as last
           from cml_replacements x where x.cml_id = m.id) r on true
      where m.owner_id = ? and m.circuit_id = ?
      order by m.tag`,
    [ownerId, circuitId],
  );

  const { rows: readingRows } = await conn.raw<{ rows: ReadingRow[] }>(
    `select t.id, t.cml_id, to_char(t.measured_on, 'YYYY-MM-DD') as measured_on, t.thickness_mm,
            t.quadrant_readings_mm, t.method, t.instrument, t.instrument_resolution_mm, t.technician,
            s.id as submission_id, s.reference
       from thickness_readings t
       join submissions s on s.id = t.submission_id and s.status = 'approved' and s.kind = 'thickness' and s.owner_id = ?
       join cmls m on m.id = t.cml_id
      where m.circuit_id = ?
      order by t.cml_id, t.measured_on, t.id`,
    [ownerId, circuitId],
  );

  const { rows: couponRows } = await conn.raw<{ rows: CouponRow[] }>(
    `select r.id as result_id, k.serial, k.material_code, p.id as point_id, p.tag as point_tag,
            to_char((e.removed_at at time zone st.time_zone)::date, 'YYYY-MM-DD') as removed_on,
            (r.computed ->> 'determinable')::boolean as determinable,
            (r.computed -> 'rate' ->> 'mmPerYear')::float8 as general_mm_y,
            (r.computed -> 'pitting' ->> 'mmPerYear')::float8 as pitting_mm_y,
            r.general_severity, r.pitting_severity, s.id as submission_id, s.reference
       from coupon_results r
       join submissions s on s.id = r.submission_id and s.status = 'approved' and s.owner_id = ?
       join coupon_exposures e on e.id = r.exposure_id
       join coupons k on k.id = e.coupon_id
       join monitoring_points p on p.id = e.point_id
       join sites st on st.id = p.site_id
      where p.circuit_id = ? and e.removed_at is not null
      order by e.removed_at, p.tag`,
    [ownerId, circuitId],
  );

  const subIds = [...new Set([...readingRows.map((r) => r.submission_id), ...couponRows.map((r) => r.submission_id)])];
  const subRows: Array<{
    id: string;
    reference: string;
    kind: "coupon" | "thickness";
    contractor_name: string;
    decided_at: string | null;
  }> =
    subIds.length === 0
      ? []
      : await conn("submissions as s")
          .join("organisations as o", "o.id", "s.contractor_id")
          .whereIn("s.id", subIds)
          .andWhere("s.owner_id", ownerId)
          .orderBy([{ column: "s.decided_at", order: "desc" }, { column: "s.reference" }])
          .select("s.id", "s.reference", "s.kind", "o.name as contractor_name", "s.decided_at");
  const counts = new Map<string, number>();
  for (const r of [...readingRows, ...couponRows]) counts.set(r.submission_id, (counts.get(r.submission_id) ?? 0) + 1);

  const nominal = num(circuit.nominal_wall_mm);
  const tolerance = num(circuit.mill_tolerance_pct);
  const readingsOf = new Map<string, HistoryReading[]>();
  for (const r of readingRows) {
    const list = readingsOf.get(r.cml_id) ?? [];
    list.push({
      id: r.id,
      measuredOn: r.measured_on,
      thicknessMm: Number(r.thickness_mm),
      quadrantReadingsMm: (r.quadrant_readings_mm ?? []).map(Number),
      method: r.method,
      instrument: r.instrument,
      instrumentResolutionMm: num(r.instrument_resolution_mm),
      technician: r.technician,
      submissionId: r.submission_id,
      reference: r.reference,
    });
    readingsOf.set(r.cml_id, list);
  }

  return {
    circuitId: circuit.id,
    circuitTag: circuit.tag,
    materialCode: circuit.material_code,
    timeZone: circuit.time_zone,
    cmls: cmlRows.map((m) => ({
      id: m.id,
      tag: m.tag,
      location: m.location,
      component: m.component,
      injectionPoint: m.injection_point,
      retired: m.retired,
      baseline: effectiveBaseline(num(m.baseline_thickness_mm), m.baseline_on, nominal, tolerance),
      replacements: m.replacements.map((x) => ({
        replacedOn: x.replaced_on,
        baselineThicknessMm: x.baseline_thickness_mm,
        reason: x.reason,
      })),
      readings: readingsOf.get(m.id) ?? [],
    })),
    coupons: couponRows.map((c) => ({
      resultId: c.result_id,
      serial: c.serial,
      materialCode: c.material_code,
      pointId: c.point_id,
      pointTag: c.point_tag,
      removedOn: c.removed_on,
      determinable: c.determinable === true,
      generalMmPerYear: c.determinable === true ? c.general_mm_y : null,
      pittingMmPerYear: c.determinable === true ? c.pitting_mm_y : null,
      generalSeverity: c.general_severity,
      pittingSeverity: c.pitting_severity,
      submissionId: c.submission_id,
      reference: c.reference,
    })),
    submissions: subRows.map((s) => ({
      id: s.id,
      reference: s.reference,
      kind: s.kind,
      contractorName: s.contractor_name,
      decidedAt: s.decided_at ? new Date(s.decided_at).toISOString() : null,
      count: counts.get(s.id) ?? 0,
    })),
  };
}
