import type { Knex } from "knex";
import type { SessionUser } from "../../app/context";
import { nextReferences } from "../../app/models/submission-references.server";
import type { World } from "./fixtures";

/**
 * Thickness surveys for review tests, written as the contractor's side writes them (a
 * `submissions` row of kind 'thickness' as a draft, its `survey_circuits` and
 * `thickness_readings` with their flags, then submitted with a `submission_revisions`
 * snapshot of every reading ordered by CML tag). Built on `buildWorld`: Owner One's
 * site, the inspection contractor's thickness contract and its technician.
 *
 * Design data (invented, demo-like): NPS 6 carbon-steel pipe, D 168.3 mm, nominal wall
 * 7.11 mm, P 2 MPa at 150 °C, S 138 MPa, E 1 — B31.3 eq. 3a gives 1.21 mm, so the API 574
 * structural minimum for NPS 6 (2.79 mm, from memory) governs.
 */

export type Flag = { code: string; severity: "warning" | "info"; message: string };

export type ReadingInput = {
  /** A reading id chosen by the test (one the table of bad inputs names before the world exists). */
  id?: string;
  cml: string;
  measuredOn: string;
  thicknessMm: number;
  quadrantsMm?: number[];
  resolutionMm?: number | null;
  notes?: string;
  flags?: Flag[];
};

export type SurveyWorld = Awaited<ReturnType<typeof buildSurveyWorld>>;

export async function buildSurveyWorld(knex: Knex, w: World) {
  const [unit] = await knex("process_units")
    .insert({ site_id: w.site.id, tag: "U-TS", description: "Crude unit" })
    .returning("id");
  const [circuit] = await knex("circuits")
    .insert({
      unit_id: unit.id,
      site_id: w.site.id,
      tag: "TS-100",
      material_code: "carbon-steel",
      service: "crude overhead",
      nps: "6",
      schedule: "80",
      outside_diameter_mm: 168.3,
      nominal_wall_mm: 7.11,
      design_pressure_mpa: 2,
      design_temperature_c: 150,
      allowable_stress_mpa: 138,
      joint_factor_e: 1,
      piping_class: 2,
    })
    .returning("id");
  const [c1, c2, c3] = await knex("cmls")
    .insert([
      {
        owner_id: w.owner.id,
        circuit_id: circuit.id,
        tag: "TS-CML-01",
        location: "upstream of the control valve",
        component: "pipe",
        baseline_thickness_mm: 7.1,
        baseline_on: "2018-03-01",
      },
      {
        owner_id: w.owner.id,
        circuit_id: circuit.id,
        tag: "TS-CML-02",
        location: "first elbow",
        component: "elbow",
        baseline_thickness_mm: 7.1,
        baseline_on: "2018-03-01",
      },
      {
        owner_id: w.owner.id,
        circuit_id: circuit.id,
        tag: "TS-CML-03",
        location: "wash-water injection",
        component: "tee",
        injection_point: true,
        baseline_thickness_mm: 7.1,
        baseline_on: "2018-03-01",
      },
    ])
    .returning(["id", "tag"]);
  const cmls: Record<string, string> = { [c1.tag]: c1.id, [c2.tag]: c2.id, [c3.tag]: c3.id };
  // The elbow was replaced in 2023: its history starts again from the new elbow's wall.
  await knex("cml_replacements").insert({
    cml_id: c2.id,
    replaced_on: "2023-06-01",
    baseline_thickness_mm: 7.3,
    reason: "elbow renewed after a leak",
  });

  const tech = w.users.inspector;

  /** A survey sent for review: draft, readings, then submitted with its revision snapshot. */
  async function submitSurvey(readings: ReadingInput[], by: SessionUser = tech): Promise<string> {
    const reference = (await nextReferences(knex, [w.site.id])).get(w.site.id)!;
    const [sub] = await knex("submissions")
      .insert({
        owner_id: w.owner.id,
        site_id: w.site.id,
        contractor_id: by.organisation.id,
        kind: "thickness",
        status: "draft",
        reference,
        created_by: by.id,
      })
      .returning("id");
    await knex("survey_circuits").insert({ submission_id: sub.id, circuit_id: circuit.id });
    await writeReadings(sub.id, readings);
    await send(sub.id, 1, by);
    return sub.id as string;
  }

  async function writeReadings(submissionId: string, readings: ReadingInput[]) {
    await knex("thickness_readings").where({ submission_id: submissionId }).del();
    await knex("thickness_readings").insert(
      readings.map((r) => ({
        ...(r.id ? { id: r.id } : {}),
        submission_id: submissionId,
        cml_id: cmls[r.cml],
        measured_on: r.measuredOn,
        thickness_mm: r.thicknessMm,
        quadrant_readings_mm: r.quadrantsMm ?? [r.thicknessMm],
        method: "UT",
        instrument: "UT gauge 38DL-0412",
        instrument_resolution_mm: r.resolutionMm === undefined ? 0.01 : r.resolutionMm,
        technician: "tech@inspection.test",
        notes: r.notes ?? "",
        flags: JSON.stringify(r.flags ?? []),
      })),
    );
  }

  async function send(submissionId: string, revision: number, by: SessionUser, reply: string | null = null) {
    const rows: Array<{
      cml_id: string;
      cml_tag: string;
      circuit_tag: string;
      measured_on: string;
      thickness_mm: string;
      quadrant_readings_mm: string[];
      method: string;
      instrument: string;
      instrument_resolution_mm: string | null;
      technician: string;
      notes: string;
      flags: Flag[];
    }> = await knex("thickness_readings as r")
      .join("cmls as m", "m.id", "r.cml_id")
      .join("circuits as c", "c.id", "m.circuit_id")
      .where("r.submission_id", submissionId)
      .orderBy("m.tag")
      .select(
        "r.cml_id",
        "m.tag as cml_tag",
        "c.tag as circuit_tag",
        knex.raw("to_char(r.measured_on, 'YYYY-MM-DD') as measured_on"),
        "r.thickness_mm",
        "r.quadrant_readings_mm",
        "r.method",
        "r.instrument",
        "r.instrument_resolution_mm",
        "r.technician",
        "r.notes",
        "r.flags",
      );
    const flagCount = rows.reduce((n, r) => n + r.flags.length, 0);
    const [updated] = await knex("submissions")
      .where({ id: submissionId })
      .update({
        status: "submitted",
        revision,
        submitted_at: knex.fn.now(),
        submitted_by: by.id,
        decided_at: null,
        decided_by: null,
        decision_comment: null,
        worst_severity: null,
        flag_count: flagCount,
        version: knex.raw("version + 1"),
        updated_at: knex.fn.now(),
      })
      .returning("submitted_at");
    await knex("submission_revisions").insert({
      submission_id: submissionId,
      revision,
      submitted_at: updated.submitted_at,
      submitted_by: by.id,
      reply,
      results: JSON.stringify(
        rows.map((r) => ({
          cml_id: r.cml_id,
          cml_tag: r.cml_tag,
          circuit_tag: r.circuit_tag,
          measured_on: r.measured_on,
          thickness_mm: Number(r.thickness_mm),
          quadrant_readings_mm: r.quadrant_readings_mm.map(Number),
          method: r.method,
          instrument: r.instrument,
          instrument_resolution_mm: r.instrument_resolution_mm === null ? null : Number(r.instrument_resolution_mm),
          technician: r.technician,
          notes: r.notes,
          flags: r.flags,
        })),
      ),
      attachments: JSON.stringify([]),
    });
  }

  /** A returned survey (or an opened correction) sent again as its next revision, with new readings and a reply. */
  async function resubmitSurvey(submissionId: string, readings: ReadingInput[], reply: string | null = null) {
    const row = await knex("submissions").where({ id: submissionId }).first("revision", "status");
    if (row.status !== "returned") throw new Error(`survey is ${row.status}, not returned`);
    const kept = await knex("submission_revisions")
      .where({ submission_id: submissionId, revision: row.revision })
      .first("revision");
    await writeReadings(submissionId, readings);
    await send(submissionId, kept ? row.revision + 1 : row.revision, tech, reply);
  }

  return { circuit: circuit.id as string, cmls, submitSurvey, resubmitSurvey, tech };
}

/** The survey's flags in the contract's words (the contractor's side computes them on submit). */
export const flag = {
  belowRequired: (tag: string, mm: number): Flag => ({
    code: "below-required",
    severity: "warning",
    message: `${tag} reads ${mm} mm, at or below the circuit's required thickness of 2.79 mm.`,
  }),
  growth: (mm: number): Flag => ({
    code: "thickness-growth",
    severity: "warning",
    message: `The wall reads ${mm} mm thicker than at the last approved reading. Walls do not grow: check the probe position, calibration and surface.`,
  }),
  belowResolution: (): Flag => ({
    code: "below-resolution",
    severity: "info",
    message:
      "The change since the last approved reading is smaller than the instrument resolves; no loss can be measured from this pair.",
  }),
};
