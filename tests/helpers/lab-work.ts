import type { Knex } from "knex";
import { labTemplateCsv } from "../../app/models/lab-import.server";
import type { World } from "./fixtures";

const header = labTemplateCsv().trim();

/** A lab CSV line in template column order from a partial record (invented lab numbers). */
export function labCsvLine(values: Record<string, string>): string {
  return header
    .split(",")
    .map((c) => {
      const v = values[c] ?? "";
      return /[",\n]/.test(v) ? `"${v.replace(/"/g, '""')}"` : v;
    })
    .join(",");
}

/** A whole lab CSV file: the template header, then one line per record. */
export function labCsv(records: Array<Record<string, string>>): string {
  return [header, ...records.map(labCsvLine)].join("\n");
}

/**
 * `count` strip coupons of the world's first owner waiting for lab results: at the
 * contractor's site, ten coupons per new point tagged `<prefix>-CH-<n>`, one after the other
 * (30-day exposures, the last removed two days ago), all removed by the monitoring
 * contractor's technician. Serials are `<prefix>-<n>`, n from 1.
 */
export async function removedCouponsWaiting(knex: Knex, w: World, prefix: string, count: number): Promise<string[]> {
  const perPoint = 10;
  const { circuit_id: circuitId } = await knex("monitoring_points").where({ id: w.point }).first("circuit_id");
  const points: Array<{ id: string }> = await knex("monitoring_points")
    .insert(
      Array.from({ length: Math.ceil(count / perPoint) }, (_, j) => ({
        owner_id: w.owner.id,
        site_id: w.site.id,
        circuit_id: circuitId,
        tag: `${prefix}-CH-${j + 1}`,
        planned_exposure_days: 30,
        mounting: "intrusive",
      })),
    )
    .returning("id");
  const serials = Array.from({ length: count }, (_, i) => `${prefix}-${i + 1}`);
  const coupons: Array<{ id: string; serial: string }> = await knex("coupons")
    .insert(
      serials.map((serial) => ({
        owner_id: w.owner.id,
        serial,
        material_code: "carbon-steel",
        density_g_cm3: 7.86,
        density_source: "ASTM G1 appendix (from memory)",
        shape: "strip",
        length_mm: 76.2,
        width_mm: 19.05,
        thickness_mm: 3.18,
        hole_diameter_mm: 7.94,
        initial_mass_g: 36.1234,
        balance_resolution_g: 0.0001,
      })),
    )
    .returning(["id", "serial"]);
  const day = 86_400_000;
  const bySerial = new Map(coupons.map((c) => [c.serial, c.id]));
  await knex("coupon_exposures").insert(
    serials.map((serial, i) => {
      const turnsLeft = perPoint - 1 - (i % perPoint); // the point's last coupon came out two days ago
      const removed = Date.now() - (2 + 30 * turnsLeft) * day;
      return {
        owner_id: w.owner.id,
        point_id: points[Math.floor(i / perPoint)].id,
        coupon_id: bySerial.get(serial),
        installed_at: new Date(removed - 30 * day).toISOString(),
        installed_by: w.users.tech.id,
        installed_by_organisation_id: w.monitoring.id,
        removed_at: new Date(removed).toISOString(),
        removed_by: w.users.tech.id,
        removed_by_organisation_id: w.monitoring.id,
      };
    }),
  );
  return serials;
}

/** Plausible lab numbers for the n-th coupon: three cleaning cycles, a blank, pit depths. */
export function labRecordFor(serial: string, n: number): Record<string, string> {
  const loss = 0.2 + (n % 37) * 0.003;
  const cycle1 = 36.1234 - loss;
  return {
    coupon_serial: serial,
    cleaning_method: "inhibited HCl, 3 cycles",
    coupon_mass_cycle1_g: cycle1.toFixed(4),
    coupon_mass_cycle2_g: (cycle1 - 0.0012).toFixed(4),
    coupon_mass_cycle3_g: (cycle1 - 0.0019).toFixed(4),
    blank_mass_before_g: "35.0000",
    blank_mass_cycle1_g: "34.9998",
    blank_mass_cycle2_g: "34.9996",
    blank_mass_cycle3_g: "34.9995",
    pit_depths_mm: n % 3 === 0 ? "0.12 0.09 0.05" : "",
    lab_notes: n % 5 === 0 ? "edges rounded, see sheet" : "",
  };
}
