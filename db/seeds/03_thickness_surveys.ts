import type { Knex } from "knex";
import { surveyReadingFlags, type ThicknessReading } from "../../app/domain/index.ts";
import { recomputeCircuitLife } from "../../app/models/circuit-life.server.ts";
import { designOf, requiredThicknessOf } from "../../app/models/circuits.server.ts";
import { nextReferences } from "../../app/models/submission-references.server.ts";

/**
 * The demo scenario's thickness surveys: CMLs on Brackwater's four circuits with design data,
 * base-lines from commissioning, and two years of UT surveys by Ferrule Inspection, approved by
 * the owner's engineer, plus one survey waiting for review. Every tag and number is invented.
 * Dates are counted back from the day the seed runs, so the figures stay the same whatever
 * day it is loaded.
 *
 * Surveys: S1 about 690 days ago (under the ended contract NVE-UT-2024-021, which this seed
 * extends to Brackwater), S2 about 350 days ago, S3 about 35 days ago (under the current
 * contract NVE-UT-2025-004), and S4 six days ago, submitted and not yet reviewed.
 *
 * Expected figures per API 570 (rate = greater of long-term and short-term; RL = (t − t_req)/rate;
 * next = min(½ RL, class maximum, 3 years at an injection point) after the last survey):
 *
 * - CDU-OVHD-01 (NPS 6 Sch 40, t_req 2.79 mm by the API 574 structural minimum, class 2),
 *   renewed 8 years ago: healthy; UT rates 0.12–0.24 mm/y agree with its coupons (about 0.21
 *   and 0.34 mm/y at BWR-CH-101/102). Governing CML OVHD-01-E02, 5.12 mm, about 0.24 mm/y →
 *   RL ≈ 9.5 y; the injection-point CML OVHD-01-N03 caps the interval at 3 years → next
 *   inspection ≈ 2.9 years from today.
 * - CDU-REFL-02 (NPS 3 Sch 80, t_req 2.03 mm, class 2): healthy, about 0.05 mm/y (coupon
 *   BWR-CH-103 about 0.06 mm/y); RL ≈ 75 y; next = the class maximum, 10 years after S3.
 *   REFL-02-E02 reads 0.12 mm thicker at S3 than at S2: growth between surveys.
 * - SWS-FEED-01 (NPS 4 Sch 80, t_req 3.83 mm by B31.3 eq. 3a, class 2): not surveyed at S3,
 *   due within 90 days: FEED-01-E02 at 4.17 mm at S2, about 0.16 mm/y (coupon BWR-CH-311
 *   about 0.11 mm/y) → RL ≈ 2.1 y → next ≈ 1.06 y after S2, about 37 days from today. S4, the
 *   survey waiting for review, covers this circuit.
 * - SWS-BTMS-01 (NPS 2 Sch 80, the owner's 2.5 mm minimum, class 3): BTMS-01-T02, the pump
 *   discharge tee, reads 2.44 mm at S3, below required thickness, eroding at about 0.33 mm/y
 *   (short-term) while the circuit's coupon BWR-CH-312 shows about 0.015 mm/y: coupon and UT
 *   rates disagree by far more than 2×.
 */

const DAY = 86_400_000;
const daysFromToday = (days: number) => new Date(Date.now() + days * DAY).toISOString().slice(0, 10);
const instantDaysAgo = (days: number, hour: number) => {
  const t = new Date(Date.now() - days * DAY);
  t.setUTCHours(hour, 0, 0, 0);
  return t.toISOString();
};

/** Days before today of each survey; the base-lines are dated at commissioning. */
const SURVEYS = { S1: 690, S2: 350, S3: 35, S4: 6 } as const;
type Survey = keyof typeof SURVEYS;
/** 22 years (the refinery's commissioning) and 8 years (the overhead line's renewal), in days. */
const COMMISSIONED = 8036;
const OVERHEAD_RENEWED = 2922;

type CmlPlan = {
  tag: string;
  location: string;
  component: string;
  injectionPoint?: boolean;
  /** null: no base-line recorded (nominal less mill tolerance stands in). */
  baselineMm: number | null;
  readings: Partial<Record<Survey, number>>;
};

const PLAN: Record<string, { commissionedDaysAgo: number; cmls: CmlPlan[] }> = {
  "CDU-OVHD-01": {
    commissionedDaysAgo: OVERHEAD_RENEWED,
    cmls: [
      {
        tag: "OVHD-01-P01",
        location: "vapour line below the tower nozzle, top of line",
        component: "pipe",
        baselineMm: 7.08,
        readings: { S1: 6.16, S2: 6.02, S3: 5.89 },
      },
      {
        tag: "OVHD-01-E02",
        location: "first elbow, outer radius",
        component: "elbow",
        baselineMm: 7.02,
        readings: { S1: 5.55, S2: 5.33, S3: 5.12 },
      },
      {
        tag: "OVHD-01-N03",
        location: "300 mm downstream of the neutraliser injection quill",
        component: "nozzle",
        injectionPoint: true,
        baselineMm: 7.1,
        readings: { S1: 5.88, S2: 5.69, S3: 5.52 },
      },
      {
        tag: "OVHD-01-T04",
        location: "tee to the relief header",
        component: "tee",
        baselineMm: null,
        readings: { S1: 5.49, S2: 5.38, S3: 5.27 },
      },
      {
        tag: "OVHD-01-P05",
        location: "bottom of line at the exchanger inlet",
        component: "pipe",
        baselineMm: 7.05,
        readings: { S1: 5.71, S2: 5.5, S3: 5.31 },
      },
    ],
  },
  "CDU-REFL-02": {
    commissionedDaysAgo: COMMISSIONED,
    cmls: [
      {
        tag: "REFL-02-P01",
        location: "reflux drum outlet, bottom of line",
        component: "pipe",
        baselineMm: 7.55,
        readings: { S1: 6.64, S2: 6.6, S3: 6.56 },
      },
      {
        tag: "REFL-02-E02",
        location: "elbow at the reflux pump suction",
        component: "elbow",
        baselineMm: 7.58,
        readings: { S1: 6.72, S2: 6.68, S3: 6.8 },
      },
      {
        tag: "REFL-02-R03",
        location: "3 × 2 reducer at the control valve",
        component: "reducer",
        baselineMm: 7.5,
        readings: { S1: 6.49, S2: 6.45, S3: 6.4 },
      },
      {
        tag: "REFL-02-V04",
        location: "control valve body, outlet side",
        component: "valve",
        baselineMm: null,
        readings: { S1: 6.07, S2: 6.04, S3: 6.01 },
      },
    ],
  },
  "SWS-FEED-01": {
    commissionedDaysAgo: COMMISSIONED,
    cmls: [
      {
        tag: "FEED-01-P01",
        location: "flash drum outlet",
        component: "pipe",
        baselineMm: 8.4,
        readings: { S1: 6.59, S2: 6.51, S4: 6.42 },
      },
      {
        tag: "FEED-01-E02",
        location: "elbow before the feed/bottoms exchanger, outer radius",
        component: "elbow",
        baselineMm: 7.55,
        readings: { S1: 4.32, S2: 4.17, S4: 4.02 },
      },
      {
        tag: "FEED-01-T03",
        location: "tee to the stripper feed pumps",
        component: "tee",
        baselineMm: null,
        readings: { S1: 5.88, S2: 5.81, S4: 5.74 },
      },
      {
        tag: "FEED-01-F04",
        location: "weld-neck flange at the stripper inlet nozzle",
        component: "flange",
        baselineMm: 8.46,
        readings: { S1: 6.45, S2: 6.36, S4: 6.26 },
      },
      {
        tag: "FEED-01-P05",
        location: "top of line on the pipe rack",
        component: "pipe",
        baselineMm: 8.5,
        readings: { S1: 7.29, S2: 7.24, S4: 7.18 },
      },
    ],
  },
  "SWS-BTMS-01": {
    commissionedDaysAgo: COMMISSIONED,
    cmls: [
      {
        tag: "BTMS-01-P01",
        location: "stripper bottoms nozzle",
        component: "pipe",
        baselineMm: 5.42,
        readings: { S1: 5.12, S2: 5.1, S3: 5.09 },
      },
      {
        tag: "BTMS-01-T02",
        location: "bottoms pump discharge tee, branch side",
        component: "tee",
        baselineMm: 5.45,
        readings: { S1: 2.95, S2: 2.72, S3: 2.44 },
      },
      {
        tag: "BTMS-01-E03",
        location: "elbow at the cooler inlet",
        component: "elbow",
        baselineMm: 5.38,
        readings: { S1: 4.98, S2: 4.96, S3: 4.94 },
      },
    ],
  },
};

/** Four clock positions around the CML; the reading is their minimum. */
const quadrants = (t: number, i: number) => {
  const extra = [0, 0.05, 0.12, 0.08];
  return extra.map((_, q) => Math.round((t + extra[(q + i) % 4]) * 100) / 100);
};

export async function seed(knex: Knex): Promise<void> {
  const owner = await knex("organisations").where({ name: "Norvale Energy" }).first("id");
  if (!owner) return; // the base scenario was not loaded (database held data)
  if (await knex("cmls").first("id")) return;
  const site = await knex("sites").where({ owner_id: owner.id, code: "BWR" }).first("id", "code");
  const circuits: Array<{ id: string; tag: string }> = site
    ? await knex("circuits").where({ site_id: site.id }).whereIn("tag", Object.keys(PLAN)).select("id", "tag")
    : [];
  if (circuits.length !== Object.keys(PLAN).length) return; // the coupon season was not loaded
  const inspection = await knex("organisations").where({ name: "Ferrule Inspection Ltd" }).first("id");
  const tech = await knex("users").where({ email: "tech@inspection.example" }).first("id", "name");
  const engineer = await knex("users").where({ email: "engineer@owner.example" }).first("id");
  const circuitId = (tag: string) => circuits.find((c) => c.tag === tag)!.id;

  await knex.transaction(async (trx) => {
    // The ended thickness contract covered Brackwater too: it explains the older surveys there.
    const ended = await trx("contracts").where({ owner_id: owner.id, reference: "NVE-UT-2024-021" }).first("id");
    await trx("contract_sites").insert({ contract_id: ended.id, site_id: site.id }).onConflict().ignore();

    const cmlIds = new Map<string, string>();
    for (const [circuitTag, plan] of Object.entries(PLAN)) {
      const rows = plan.cmls.map((m) => ({
        owner_id: owner.id,
        circuit_id: circuitId(circuitTag),
        tag: m.tag,
        location: m.location,
        component: m.component,
        injection_point: m.injectionPoint ?? false,
        baseline_thickness_mm: m.baselineMm,
        baseline_on: daysFromToday(-plan.commissionedDaysAgo),
      }));
      const inserted: Array<{ id: string; tag: string }> = await trx("cmls").insert(rows).returning(["id", "tag"]);
      for (const r of inserted) cmlIds.set(r.tag, r.id);
    }

    // Each reading carries the flags the survey's submit gives it (the same library function),
    // judged against the CML's approved history, base-line and its circuit's required thickness.
    const requiredOf = new Map<string, number | null>();
    for (const c of await trx("circuits").whereIn(
      "id",
      circuits.map((x) => x.id),
    )) {
      const required = requiredThicknessOf({ ...designOf(c), material_code: c.material_code });
      requiredOf.set(c.id, required.status === "ok" ? required.requiredMm : null);
    }
    const approvedHistory = new Map<string, ThicknessReading[]>();
    const plannedCml = new Map(
      Object.entries(PLAN).flatMap(([circuitTag, p]) =>
        p.cmls.map((m) => [m.tag, { ...m, circuitTag, baselineOn: daysFromToday(-p.commissionedDaysAgo) }] as const),
      ),
    );

    const trail: Array<Record<string, unknown>> = [];
    for (const survey of Object.keys(SURVEYS) as Survey[]) {
      const measuredDaysAgo = SURVEYS[survey];
      const approved = survey !== "S4";
      const covered = Object.entries(PLAN).filter(([, p]) => p.cmls.some((m) => m.readings[survey] !== undefined));
      const reference = (await nextReferences(trx, [site.id])).get(site.id)!;
      const submittedAt = instantDaysAgo(measuredDaysAgo - (approved ? 5 : 2), 16);
      const decidedAt = approved ? instantDaysAgo(measuredDaysAgo - 12, 15) : null;
      const [sub]: Array<{ id: string }> = await trx("submissions")
        .insert({
          owner_id: owner.id,
          site_id: site.id,
          contractor_id: inspection.id,
          kind: "thickness",
          status: "draft",
          reference,
          created_by: tech.id,
          created_at: instantDaysAgo(measuredDaysAgo, 8),
        })
        .returning("id");
      await trx("survey_circuits").insert(
        covered.map(([tag]) => ({ submission_id: sub.id, circuit_id: circuitId(tag) })),
      );
      const readings = covered.flatMap(([, p]) =>
        p.cmls
          .filter((m) => m.readings[survey] !== undefined)
          .map((m, i) => ({
            submission_id: sub.id,
            cml_id: cmlIds.get(m.tag)!,
            measured_on: daysFromToday(-measuredDaysAgo),
            thickness_mm: m.readings[survey]!,
            quadrant_readings_mm: quadrants(m.readings[survey]!, i),
            method: "UT",
            instrument: "FI-UTG-07 (A-scan gauge, 0.01 mm display)",
            instrument_resolution_mm: 0.01,
            technician: tech.name ?? "",
          })),
      );
      const tagOf = new Map([...cmlIds].map(([tag, id]) => [id, tag]));
      const judged = readings.map((r) => {
        const tag = tagOf.get(r.cml_id)!;
        const m = plannedCml.get(tag)!;
        const flags = surveyReadingFlags({
          reading: { date: r.measured_on, thicknessMm: r.thickness_mm, quadrantReadingsMm: r.quadrant_readings_mm },
          history: approvedHistory.get(tag) ?? [],
          baseline: m.baselineMm === null ? null : { date: m.baselineOn, thicknessMm: m.baselineMm },
          requiredThicknessMm: requiredOf.get(circuitId(m.circuitTag)) ?? undefined,
          instrumentResolutionMm: r.instrument_resolution_mm,
        });
        return { ...r, flags: JSON.stringify(flags), tag, circuitTag: m.circuitTag, parsedFlags: flags };
      });
      const stored: Array<{ id: string; cml_id: string }> = await trx("thickness_readings")
        .insert(judged.map(({ tag: _t, circuitTag: _c, parsedFlags: _f, ...row }) => row))
        .returning(["id", "cml_id"]);
      const readingIdOf = new Map(stored.map((x) => [x.cml_id, x.id]));
      if (approved)
        for (const r of judged)
          approvedHistory.set(r.tag, [
            ...(approvedHistory.get(r.tag) ?? []),
            { date: r.measured_on, thicknessMm: r.thickness_mm },
          ]);
      const warnings = judged.flatMap((r) =>
        r.parsedFlags.filter((f) => f.severity === "warning").map((f) => ({ r, f })),
      );
      await trx("submissions")
        .where({ id: sub.id })
        .update({
          status: "submitted",
          submitted_at: submittedAt,
          submitted_by: tech.id,
          flag_count: judged.reduce((n, r) => n + r.parsedFlags.length, 0),
        });
      await trx("submission_revisions").insert({
        submission_id: sub.id,
        revision: 1,
        submitted_at: submittedAt,
        submitted_by: tech.id,
        results: JSON.stringify(
          [...judged]
            .sort((a, b) => (a.tag < b.tag ? -1 : a.tag > b.tag ? 1 : 0))
            .map((r) => ({
              cml_id: r.cml_id,
              cml_tag: r.tag,
              circuit_tag: r.circuitTag,
              measured_on: r.measured_on,
              thickness_mm: r.thickness_mm,
              quadrant_readings_mm: r.quadrant_readings_mm,
              method: r.method,
              instrument: r.instrument,
              instrument_resolution_mm: r.instrument_resolution_mm,
              technician: r.technician,
              notes: "",
              flags: r.parsedFlags,
            })),
        ),
        attachments: JSON.stringify([]),
        acknowledgements: approved
          ? JSON.stringify(
              warnings.map(({ r, f }) => ({
                key: `ack.${readingIdOf.get(r.cml_id)}.${f.code}`,
                resultId: readingIdOf.get(r.cml_id),
                code: f.code,
                message: f.message,
                label: r.tag,
                subject: `CML ${r.tag}`,
                reason:
                  f.code === "below-required"
                    ? "Confirmed by a second gauge; fitness-for-service assessment booked with the owner's engineer."
                    : "Re-read on site with the same gauge and probe position; the reading stands.",
              })),
            )
          : null,
        decision: approved ? "approved" : null,
        decided_by: approved ? engineer.id : null,
        decided_at: decidedAt,
      });
      if (approved)
        await trx("submissions")
          .where({ id: sub.id })
          .update({ status: "approved", decided_at: decidedAt, decided_by: engineer.id });
      trail.push({
        owner_id: owner.id,
        actor_user_id: tech.id,
        actor_organisation_id: inspection.id,
        actor_label: "tech@inspection.example",
        action: "submission.submitted",
        record_type: "submission",
        record_id: sub.id,
        after: JSON.stringify({ status: "submitted", revision: 1, readings: readings.length }),
        reason: "loaded with the demo scenario",
        created_at: submittedAt,
        hash: "",
      });
      if (approved)
        trail.push({
          owner_id: owner.id,
          actor_user_id: engineer.id,
          actor_organisation_id: owner.id,
          actor_label: "engineer@owner.example",
          action: "submission.approved",
          record_type: "submission",
          record_id: sub.id,
          after: JSON.stringify({ status: "approved", revision: 1 }),
          reason: "loaded with the demo scenario",
          created_at: decidedAt,
          hash: "",
        });
    }
    for (const event of trail) await trx("audit_events").insert(event);
    await trx("audit_events").insert({
      owner_id: owner.id,
      actor_user_id: engineer.id,
      actor_organisation_id: owner.id,
      actor_label: "demo seed",
      action: "scenario.thickness_history_loaded",
      record_type: "organisation",
      record_id: owner.id,
      after: JSON.stringify({ cmls: cmlIds.size, surveys: Object.keys(SURVEYS).length }),
      hash: "",
    });
    await recomputeCircuitLife(trx, { ownerId: owner.id, cause: "recompute" });
  });
}
