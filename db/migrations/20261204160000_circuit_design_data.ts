import type { Knex } from "knex";

/**
 * A circuit's design data, all SI and all optional: a circuit may have none yet. The
 * checks hold the ranges the calculation library accepts (app/domain/piping.ts).
 */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.alterTable("circuits", (t) => {
    t.text("nps").comment('nominal pipe size as written, e.g. "2" or "2-1/2"; drives the API 574 structural minimum');
    t.text("schedule").comment('pipe schedule as written, e.g. "40", "XS", "80S"');
    t.decimal("outside_diameter_mm", 10, 3).comment("outside diameter D used in B31.3 eq. 3a, mm");
    t.decimal("nominal_wall_mm", 8, 3).comment("nominal wall thickness, mm");
    t.decimal("mill_tolerance_pct", 5, 2).defaultTo(12.5).comment("mill under-tolerance, percent of nominal wall");
    t.decimal("design_pressure_mpa", 10, 4).comment("internal design pressure P, MPa gauge");
    t.decimal("design_temperature_c", 7, 2).comment("design temperature, °C");
    t.decimal("allowable_stress_mpa", 8, 2).comment("allowable stress S at the design temperature, MPa");
    t.decimal("joint_factor_e", 5, 4).comment("longitudinal weld joint quality factor E, (0, 1]");
    t.decimal("weld_factor_w", 5, 4).defaultTo(1).comment("weld joint strength reduction factor W, (0, 1]");
    t.decimal("y_coefficient", 5, 4).comment("coefficient Y; null = B31.3 Table 304.1.1 by material and temperature");
    t.decimal("corrosion_allowance_mm", 8, 3).comment("corrosion allowance, mm; shown beside the required thickness");
    t.decimal("structural_minimum_mm", 8, 3).comment("the owner's structural minimum, mm; null = API 574 by NPS");
    t.text("structural_minimum_reason").comment("why the owner's structural minimum is used");
    t.smallint("piping_class").comment("API 570 piping class 1 to 4");
    t.check("outside_diameter_mm is null or outside_diameter_mm > 0", [], "circuits_od_check");
    t.check("nominal_wall_mm is null or nominal_wall_mm > 0", [], "circuits_nominal_wall_check");
    t.check(
      "mill_tolerance_pct is null or (mill_tolerance_pct >= 0 and mill_tolerance_pct < 100)",
      [],
      "circuits_mill_tolerance_check",
    );
    t.check("design_pressure_mpa is null or design_pressure_mpa > 0", [], "circuits_design_pressure_check");
    t.check(
      "design_temperature_c is null or design_temperature_c between -273.15 and 1000",
      [],
      "circuits_design_temperature_check",
    );
    t.check("allowable_stress_mpa is null or allowable_stress_mpa > 0", [], "circuits_allowable_stress_check");
    t.check(
      "joint_factor_e is null or (joint_factor_e > 0 and joint_factor_e <= 1)",
      [],
      "circuits_joint_factor_check",
    );
    t.check("weld_factor_w is null or (weld_factor_w > 0 and weld_factor_w <= 1)", [], "circuits_weld_factor_check");
    t.check("y_coefficient is null or (y_coefficient >= 0 and y_coefficient < 1)", [], "circuits_y_check");
    t.check("corrosion_allowance_mm is null or corrosion_allowance_mm >= 0", [], "circuits_corrosion_allowance_check");
    t.check(
      "structural_minimum_mm is null or (structural_minimum_mm > 0 and structural_minimum_reason is not null)",
      [],
      "circuits_structural_minimum_check",
    );
    t.check("piping_class is null or piping_class between 1 and 4", [], "circuits_piping_class_check");
  });
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.alterTable("circuits", (t) => {
    t.dropChecks([
      "circuits_od_check",
      "circuits_nominal_wall_check",
      "circuits_mill_tolerance_check",
      "circuits_design_pressure_check",
      "circuits_design_temperature_check",
      "circuits_allowable_stress_check",
      "circuits_joint_factor_check",
      "circuits_weld_factor_check",
      "circuits_y_check",
      "circuits_corrosion_allowance_check",
      "circuits_structural_minimum_check",
      "circuits_piping_class_check",
    ]);
    t.dropColumns(
      "nps",
      "schedule",
      "outside_diameter_mm",
      "nominal_wall_mm",
      "mill_tolerance_pct",
      "design_pressure_mpa",
      "design_temperature_c",
      "allowable_stress_mpa",
      "joint_factor_e",
      "weld_factor_w",
      "y_coefficient",
      "corrosion_allowance_mm",
      "structural_minimum_mm",
      "structural_minimum_reason",
      "piping_class",
    );
  });
}
