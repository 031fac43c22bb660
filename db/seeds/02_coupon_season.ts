import type { Knex } from "knex";
import {
  couponArea,
  evaluateCouponResult,
  findMaterial,
  K_CONSTANTS,
  type CouponGeometry,
} from "../../app/domain/index.ts";

/**
 * The demo scenario's coupon monitoring: Norvale Energy's two plants with process units,
 * circuits and coupon positions; two years of approved pulls at most points (so trends
 * have history), coupons in service now (some due, some overdue), and submissions waiting
 * for review (one with quality flags, one severe). Every tag, serial and number is
 * invented; the corrosion rates are chosen per point and turned into lab masses with
 * the weight-loss formula, then computed back by the calculation library like any
 * submission.
 */

const DAY = 86_400_000;
const now = Date.now();
const daysAgo = (d: number, hour = 10) => {
  const t = new Date(now - d * DAY);
  t.setUTCHours(hour, 0, 0, 0);
  return t.toISOString();
};

/** A small deterministic generator so every load of the scenario is the same. */
function rng(seed: number) {
  let s = seed >>> 0;
  return () => {
    s = (s * 1664525 + 1013904223) >>> 0;
    return s / 2 ** 32;
  };
}

type PointPlan = {
  tag: string;
  circuit: string;
  orientation: string;
  fitting: string;
  mounting: "flush" | "intrusive";
  planned: number;
  /** typical general rate, mm/y, and deepest pit per pull, mm */
  rate: number;
  pit: number;
  /** days the coupon in service has been in (null: the point is empty) */
  inServiceFor: number | null;
};

const strip: CouponGeometry = {
  shape: "strip",
  lengthMm: 76.2,
  widthMm: 19.05,
  thicknessMm: 3.18,
  holeDiameterMm: 7.94,
};
const disc: CouponGeometry = { shape: "flush-disc", diameterMm: 31.75 };

/**
 * Invented design data for some Brackwater circuits (carbon steel; SI as stored). One is
 * governed by pressure design, two by the API 574 structural minimum, one by the
 * owner's own minimum; Tarn Hollow's circuits have none yet.
 */
const BRACKWATER_DESIGN: Record<string, Record<string, string | number>> = {
  "CDU-OVHD-01": {
    nps: "6",
    schedule: "40",
    outside_diameter_mm: 168.3,
    nominal_wall_mm: 7.11,
    design_pressure_mpa: 0.35,
    design_temperature_c: 150,
    allowable_stress_mpa: 138,
    joint_factor_e: 1,
    corrosion_allowance_mm: 3,
    piping_class: 2,
  },
  "CDU-REFL-02": {
    nps: "3",
    schedule: "80",
    outside_diameter_mm: 88.9,
    nominal_wall_mm: 7.62,
    design_pressure_mpa: 1.4,
    design_temperature_c: 90,
    allowable_stress_mpa: 138,
    joint_factor_e: 1,
    corrosion_allowance_mm: 3,
    piping_class: 2,
  },
  "SWS-FEED-01": {
    nps: "4",
    schedule: "80",
    outside_diameter_mm: 114.3,
    nominal_wall_mm: 8.56,
    design_pressure_mpa: 9.5,
    design_temperature_c: 120,
    allowable_stress_mpa: 138,
    joint_factor_e: 1,
    corrosion_allowance_mm: 3,
    piping_class: 2,
  },
  "SWS-BTMS-01": {
    nps: "2",
    schedule: "80",
    outside_diameter_mm: 60.3,
    nominal_wall_mm: 5.54,
    design_pressure_mpa: 0.8,
    design_temperature_c: 130,
    allowable_stress_mpa: 138,
    joint_factor_e: 0.85,
    corrosion_allowance_mm: 1.5,
    structural_minimum_mm: 2.5,
    structural_minimum_reason: "Site minimum for small-bore lines near the stripper bottoms pumps (vibration)",
    piping_class: 3,
  },
};

export async function seed(knex: Knex): Promise<void> {
  const owner = await knex("organisations").where({ name: "Norvale Energy" }).first("id");
  if (!owner) return; // the base scenario was not loaded (database held data)
  if (await knex("process_units").first("id")) return;
  const monitoring = await knex("organisations").where({ name: "Quillon Corrosion Services" }).first("id");
  const tech = await knex("users").where({ email: "tech@monitoring.example" }).first("id");
  const engineer = await knex("users").where({ email: "engineer@owner.example" }).first("id");
  const sites = await knex("sites").where({ owner_id: owner.id }).select("id", "code");
  const siteId = (code: string) => sites.find((s) => s.code === code)!.id as string;
  const random = rng(20261201);
  const steel = findMaterial("carbon-steel");

  await knex.transaction(async (trx) => {
    await trx("owner_settings").insert({ owner_id: owner.id, minimum_exposure_days: 45 });

    const plant: Record<
      string,
      { units: Array<[string, string]>; circuits: Array<[string, string, string, string]>; points: PointPlan[] }
    > = {
      BWR: {
        units: [
          ["U-100", "Crude distillation"],
          ["U-310", "Sour water stripping"],
        ],
        circuits: [
          ["U-100", "CDU-OVHD-01", "Crude tower overhead vapour line to exchangers", "crude overhead vapour, HCl/H₂S"],
          ["U-100", "CDU-REFL-02", "Overhead reflux drum outlet", "naphtha and sour water"],
          ["U-310", "SWS-FEED-01", "Sour water feed from the flash drum", "sour water, NH₄HS"],
          ["U-310", "SWS-BTMS-01", "Stripper bottoms to the cooler", "stripped water"],
        ],
        points: [
          {
            tag: "BWR-CH-101",
            circuit: "CDU-OVHD-01",
            orientation: "top of line, 12 o'clock",
            fitting: "2-in access fitting AF-101",
            mounting: "flush",
            planned: 90,
            rate: 0.21,
            pit: 0.09,
            inServiceFor: 97,
          },
          {
            tag: "BWR-CH-102",
            circuit: "CDU-OVHD-01",
            orientation: "bottom of line, 6 o'clock",
            fitting: "2-in access fitting AF-102",
            mounting: "intrusive",
            planned: 90,
            rate: 0.34,
            pit: 0.16,
            inServiceFor: 104,
          },
          {
            tag: "BWR-CH-103",
            circuit: "CDU-REFL-02",
            orientation: "bottom of line, 6 o'clock",
            fitting: "2-in access fitting AF-103",
            mounting: "intrusive",
            planned: 90,
            rate: 0.06,
            pit: 0.03,
            inServiceFor: 81,
          },
          {
            tag: "BWR-CH-311",
            circuit: "SWS-FEED-01",
            orientation: "side, 3 o'clock",
            fitting: "2-in access fitting AF-311",
            mounting: "flush",
            planned: 60,
            rate: 0.11,
            pit: 0.05,
            inServiceFor: 52,
          },
          {
            tag: "BWR-CH-312",
            circuit: "SWS-BTMS-01",
            orientation: "bottom of line, 6 o'clock",
            fitting: "2-in access fitting AF-312",
            mounting: "intrusive",
            planned: 90,
            rate: 0.015,
            pit: 0,
            inServiceFor: 33,
          },
        ],
      },
      THG: {
        units: [
          ["U-20", "Inlet separation"],
          ["U-40", "Amine treating"],
        ],
        circuits: [
          ["U-20", "INL-GAS-01", "Inlet gas from the slug catcher", "wet gas with CO₂"],
          ["U-40", "AMN-RICH-01", "Rich amine, contactor to flash drum", "rich MDEA"],
          ["U-40", "AMN-LEAN-01", "Lean amine return", "lean MDEA"],
        ],
        points: [
          {
            tag: "THG-CH-021",
            circuit: "INL-GAS-01",
            orientation: "bottom of line, 6 o'clock",
            fitting: "2-in access fitting AF-21",
            mounting: "flush",
            planned: 90,
            rate: 0.09,
            pit: 0.07,
            inServiceFor: 88,
          },
          {
            tag: "THG-CH-041",
            circuit: "AMN-RICH-01",
            orientation: "bottom of line, 6 o'clock",
            fitting: "2-in access fitting AF-41",
            mounting: "intrusive",
            planned: 120,
            rate: 0.14,
            pit: 0.06,
            inServiceFor: 131,
          },
          {
            tag: "THG-CH-042",
            circuit: "AMN-LEAN-01",
            orientation: "side, 9 o'clock",
            fitting: "2-in access fitting AF-42",
            mounting: "flush",
            planned: 120,
            rate: 0.02,
            pit: 0,
            inServiceFor: null,
          },
        ],
      },
    };

    let serialNo = 4100;
    const nextSerial = () => `QCS-${serialNo++}`;
    const submissionsBySiteAndQuarter = new Map<string, string>();
    const decisions: Array<{ id: string; status: "approved" | "submitted" }> = [];
    let submissionNo = 0;

    const newCoupon = async (geometry: CouponGeometry) => {
      const area = couponArea(geometry);
      const volumeCm3 =
        geometry.shape === "strip"
          ? (geometry.lengthMm * geometry.widthMm * geometry.thicknessMm -
              (Math.PI * (geometry.holeDiameterMm ?? 0) ** 2 * geometry.thicknessMm) / 4) /
            1000
          : geometry.shape === "flush-disc"
            ? (Math.PI * geometry.diameterMm ** 2 * 3.18) / 4000
            : 10;
      const mass = Math.round((volumeCm3 * steel.densityGcm3 - 0.05 + random() * 0.1) * 10_000) / 10_000;
      const dims =
        geometry.shape === "strip"
          ? {
              length_mm: geometry.lengthMm,
              width_mm: geometry.widthMm,
              thickness_mm: geometry.thicknessMm,
              hole_diameter_mm: geometry.holeDiameterMm ?? 0,
            }
          : { diameter_mm: (geometry as { diameterMm: number }).diameterMm };
      const [c] = await trx("coupons")
        .insert({
          owner_id: owner.id,
          serial: nextSerial(),
          material_code: steel.key,
          density_g_cm3: steel.densityGcm3,
          density_source: steel.densitySource,
          shape: geometry.shape,
          ...dims,
          initial_mass_g: mass,
          balance_resolution_g: 0.0001,
          lot: "L-2024-07",
          certificate: "MC-88213",
        })
        .returning(["id", "serial", "initial_mass_g"]);
      return { id: c.id as string, serial: c.serial as string, mass: Number(c.initial_mass_g), area };
    };

    const submissionFor = async (code: string, key: string, status: "approved" | "submitted", submittedAt: string) => {
      const k = `${code}|${key}`;
      const existing = submissionsBySiteAndQuarter.get(k);
      if (existing) return existing;
      submissionNo += 1;
      const { rows } = await trx.raw("select nextval('submission_number_seq') as n");
      const [p] = await trx("submissions")
        .insert({
          owner_id: owner.id,
          site_id: siteId(code),
          contractor_id: monitoring.id,
          kind: "coupon",
          // results go in while the submission is open ("returned" accepts results; several
          // past quarters at one site may not all be drafts at once); the decision follows below
          status: "returned",
          reference: `${code}-SUB-${String(rows[0].n).padStart(5, "0")}`,
          created_by: tech.id,
          submitted_at: submittedAt,
          submitted_by: tech.id,
          decided_at: status === "approved" ? new Date(Date.parse(submittedAt) + 6 * DAY).toISOString() : null,
          decided_by: status === "approved" ? engineer.id : null,
          created_at: submittedAt,
        })
        .returning("id");
      submissionsBySiteAndQuarter.set(k, p.id);
      decisions.push({ id: p.id, status });
      return p.id as string;
    };

    for (const [code, spec] of Object.entries(plant)) {
      const unitIds = new Map<string, string>();
      for (const [tag, description] of spec.units) {
        const [u] = await trx("process_units")
          .insert({ site_id: siteId(code), tag, description })
          .returning("id");
        unitIds.set(tag, u.id);
      }
      const circuitIds = new Map<string, string>();
      for (const [unit, tag, description, service] of spec.circuits) {
        const [c] = await trx("circuits")
          .insert({
            unit_id: unitIds.get(unit),
            site_id: siteId(code),
            tag,
            description,
            material_code: steel.key,
            service,
            ...(code === "BWR" ? BRACKWATER_DESIGN[tag] : {}),
          })
          .returning("id");
        circuitIds.set(tag, c.id);
      }
      for (const plan of spec.points) {
        const [point] = await trx("monitoring_points")
          .insert({
            owner_id: owner.id,
            site_id: siteId(code),
            circuit_id: circuitIds.get(plan.circuit),
            tag: plan.tag,
            access_fitting: plan.fitting,
            orientation: plan.orientation,
            mounting: plan.mounting,
            planned_exposure_days: plan.planned,
          })
          .returning("id");
        const geometry = plan.mounting === "flush" ? disc : strip;
        // Work back from today: the coupon in service, then completed pulls of `planned` days each.
        let end = plan.inServiceFor === null ? 20 : plan.inServiceFor;
        const history: Array<{ installed: number; removed: number }> = [];
        while (end + plan.planned < 730) {
          history.push({ installed: end + plan.planned + 1, removed: end + 1 });
          end += plan.planned + 1;
        }
        history.reverse();
        for (const [i, span] of history.entries()) {
          const coupon = await newCoupon(geometry);
          const installedAt = daysAgo(span.installed, 9);
          const removedAt = daysAgo(span.removed, 14);
          const isLatest = i === history.length - 1;
          const [exposure] = await trx("coupon_exposures")
            .insert({
              owner_id: owner.id,
              point_id: point.id,
              coupon_id: coupon.id,
              installed_at: installedAt,
              installed_by: tech.id,
              installed_by_organisation_id: monitoring.id,
              removed_at: removedAt,
              removed_by: tech.id,
              removed_by_organisation_id: monitoring.id,
              deposits:
                plan.rate > 0.2
                  ? "black iron sulphide film, loose scale"
                  : plan.rate > 0.05
                    ? "thin dark film"
                    : "light tarnish",
              pitting_visible: plan.pit > 0.05,
            })
            .returning("id");
          // The newest pull at two points waits for review: BWR-CH-102 (severe) and THG-CH-021
          // (a pitting factor that contradicts "no pitting seen", a flag).
          const pending = isLatest && (plan.tag === "BWR-CH-102" || plan.tag === "THG-CH-021");
          const drift = 0.8 + random() * 0.4 + (pending && plan.tag === "BWR-CH-102" ? 0.35 : 0);
          const hours = (Date.parse(removedAt) - Date.parse(installedAt)) / 3_600_000;
          const loss = (plan.rate * drift * coupon.area * hours * steel.densityGcm3) / K_CONSTANTS.mmPerYear;
          const round4 = (v: number) => Math.round(v * 10_000) / 10_000;
          const couponMasses = [0.0016, 0.0031, 0.0046].map((extra, c) =>
            round4(coupon.mass - loss * (c === 0 ? 0.985 : 1) - extra),
          );
          const blankInitial = round4(coupon.mass + 0.0123);
          const blankMasses = [0.0014, 0.0029, 0.0043].map((x) => round4(blankInitial - x));
          const pits =
            plan.pit > 0
              ? [plan.pit * (0.8 + random() * 0.5), plan.pit * 0.7, plan.pit * 0.55].map(
                  (d) => Math.round(d * 100) / 100,
                )
              : [];
          const pittingVisible = pending && plan.tag === "THG-CH-021" ? false : plan.pit > 0.05;
          if (pittingVisible !== plan.pit > 0.05)
            await trx("coupon_exposures").where({ id: exposure.id }).update({ pitting_visible: pittingVisible });
          const lab = {
            cleaningMethod: "inhibited hydrochloric acid, 3 cycles",
            couponMassesG: couponMasses,
            finalMassG: null,
            blankInitialMassG: blankInitial,
            blankMassesG: blankMasses,
            baseMetalFromCycle: null,
            pitDepthsMm: pits,
            labNotes: "",
          };
          const calculation = {
            geometry,
            densityGcm3: steel.densityGcm3,
            densitySource: steel.densitySource,
            initialMassG: coupon.mass,
            balanceResolutionG: 0.0001,
            installedAt,
            removedAt,
            couponMassesG: couponMasses,
            finalMassG: null,
            blankInitialMassG: blankInitial,
            blankMassesG: blankMasses,
            baseMetalFromCycle: null,
            pitDepthsMm: pits,
            pittingVisible,
            minimumExposureDays: 45,
          };
          const outcome = evaluateCouponResult(calculation);
          if (!outcome.ok)
            throw new Error(`demo data for ${plan.tag} does not compute: ${JSON.stringify(outcome.errors)}`);
          const quarter = Math.floor(span.removed / 91);
          const submittedAt = new Date(Date.parse(removedAt) + 9 * DAY).toISOString();
          const submissionId = await submissionFor(
            code,
            pending ? "pending" : `q${quarter}`,
            pending ? "submitted" : "approved",
            pending ? daysAgo(Math.max(1, span.removed - 9), 16) : submittedAt,
          );
          await trx("coupon_results").insert({
            submission_id: submissionId,
            exposure_id: exposure.id,
            cleaning_method: lab.cleaningMethod,
            coupon_masses_g: couponMasses,
            blank_initial_mass_g: blankInitial,
            blank_masses_g: blankMasses,
            pit_depths_mm: pits,
            inputs: JSON.stringify({ calculation, lab }),
            computed: JSON.stringify(outcome.result),
            flags: JSON.stringify(outcome.result.flags),
            general_severity: outcome.result.severity.general,
            pitting_severity: outcome.result.severity.pitting,
          });
        }
        if (plan.inServiceFor !== null) {
          const coupon = await newCoupon(geometry);
          await trx("coupon_exposures").insert({
            owner_id: owner.id,
            point_id: point.id,
            coupon_id: coupon.id,
            installed_at: daysAgo(plan.inServiceFor, 9),
            installed_by: tech.id,
            installed_by_organisation_id: monitoring.id,
          });
        }
      }
    }
    // Stock for the next exchanges.
    for (let i = 0; i < 6; i++) await newCoupon(strip);
    for (let i = 0; i < 6; i++) await newCoupon(disc);

    // Each submission's worst severity and flag count, as submission does.
    await trx.raw(
      `
      update submissions s set
        worst_severity = (select case max(greatest(
            array_position(array['low','moderate','high','severe'], r.general_severity),
            coalesce(array_position(array['low','moderate','high','severe'], r.pitting_severity), 0)))
          when 1 then 'low' when 2 then 'moderate' when 3 then 'high' else 'severe' end
          from coupon_results r where r.submission_id = s.id),
        flag_count = (select coalesce(sum(jsonb_array_length(r.flags)), 0) from coupon_results r where r.submission_id = s.id)
      where s.owner_id = ?`,
      [owner.id],
    );
    // Close each submission as submitting and review would: a revision snapshot, then the decision.
    for (const d of decisions) {
      const results = await trx("coupon_results")
        .where({ submission_id: d.id })
        .select("exposure_id", "inputs", "computed");
      const sub = await trx("submissions").where({ id: d.id }).first("submitted_at", "decided_at");
      await trx("submission_revisions").insert({
        submission_id: d.id,
        revision: 1,
        submitted_at: sub.submitted_at,
        submitted_by: tech.id,
        results: JSON.stringify(results),
        decision: d.status === "approved" ? "approved" : null,
        decided_by: d.status === "approved" ? engineer.id : null,
        decided_at: d.status === "approved" ? sub.decided_at : null,
      });
      await trx("submissions").where({ id: d.id }).update({ status: d.status });
      const trail = [
        {
          actor: tech.id,
          org: monitoring.id,
          label: "tech@monitoring.example",
          action: "submission.submitted",
          at: sub.submitted_at,
          after: { status: "submitted", revision: 1 },
        },
        ...(d.status === "approved"
          ? [
              {
                actor: engineer.id,
                org: owner.id,
                label: "engineer@owner.example",
                action: "submission.approved",
                at: sub.decided_at,
                after: { status: "approved", revision: 1 },
              },
            ]
          : []),
      ];
      for (const t of trail) {
        await trx("audit_events").insert({
          owner_id: owner.id,
          actor_user_id: t.actor,
          actor_organisation_id: t.org,
          actor_label: t.label,
          action: t.action,
          record_type: "submission",
          record_id: d.id,
          after: JSON.stringify(t.after),
          reason: "loaded with the demo scenario",
          created_at: t.at,
          hash: "",
        });
      }
    }

    void submissionNo;

    await trx("audit_events").insert({
      owner_id: owner.id,
      actor_user_id: engineer.id,
      actor_organisation_id: owner.id,
      actor_label: "demo seed",
      action: "scenario.coupon_history_loaded",
      record_type: "organisation",
      record_id: owner.id,
      after: JSON.stringify({ submissions: submissionsBySiteAndQuarter.size }),
      hash: "",
    });
  });
}
