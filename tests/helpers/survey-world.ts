import type { Knex } from "knex";

/**
 * Building blocks for thickness-survey tests: CMLs on a circuit and approved history at
 * them, inserted directly (the CML set-up screens are their own model). Every tag and
 * number is chosen by the caller; invented test data, not demo data.
 */

/** A CML on a circuit; returns its id. */
export async function cml(
  knex: Knex,
  at: { ownerId: string; circuitId: string },
  c: {
    tag: string;
    location?: string;
    component?: string;
    injectionPoint?: boolean;
    baselineMm?: number | null;
    baselineOn?: string | null;
  },
): Promise<string> {
  const [row] = await knex("cmls")
    .insert({
      owner_id: at.ownerId,
      circuit_id: at.circuitId,
      tag: c.tag,
      location: c.location ?? "",
      component: c.component ?? "pipe",
      injection_point: c.injectionPoint ?? false,
      baseline_thickness_mm: c.baselineMm ?? null,
      baseline_on: c.baselineOn ?? null,
    })
    .returning("id");
  return row.id as string;
}

/**
 * An approved survey by a contractor at a site holding the given readings (one per CML),
 * as if an engineer had approved it: the history a new survey is judged against.
 */
export async function approvedReadings(
  knex: Knex,
  at: { ownerId: string; siteId: string; contractorId: string; createdBy: string; reference: string },
  readings: Array<{ cmlId: string; circuitId: string; measuredOn: string; thicknessMm: number }>,
): Promise<string> {
  const [sub] = await knex("submissions")
    .insert({
      owner_id: at.ownerId,
      site_id: at.siteId,
      contractor_id: at.contractorId,
      kind: "thickness",
      status: "draft",
      reference: at.reference,
      created_by: at.createdBy,
    })
    .returning("id");
  const circuits = [...new Set(readings.map((r) => r.circuitId))];
  await knex("survey_circuits").insert(circuits.map((c) => ({ submission_id: sub.id, circuit_id: c })));
  await knex("thickness_readings").insert(
    readings.map((r) => ({
      submission_id: sub.id,
      cml_id: r.cmlId,
      measured_on: r.measuredOn,
      thickness_mm: r.thicknessMm,
      quadrant_readings_mm: [r.thicknessMm],
    })),
  );
  await knex("submissions")
    .where({ id: sub.id })
    .update({ status: "approved", submitted_at: knex.fn.now(), decided_at: knex.fn.now() });
  return sub.id as string;
}

/** A circuit's design data enough for a required thickness (B31.3 eq. 3a against the API 574 minimum). */
export async function designCircuit(
  knex: Knex,
  circuitId: string,
  design: { structuralMinimumMm: number; reason: string },
): Promise<void> {
  // Low pressure on NPS 6 (168.3 mm OD, API 574 table): the owner's structural minimum governs.
  await knex("circuits").where({ id: circuitId }).update({
    design_pressure_mpa: 1,
    outside_diameter_mm: 168.3,
    allowable_stress_mpa: 138,
    joint_factor_e: 1,
    design_temperature_c: 100,
    nps: "6",
    structural_minimum_mm: design.structuralMinimumMm,
    structural_minimum_reason: design.reason,
  });
}
