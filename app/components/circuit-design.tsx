import { mmToInch } from "~/domain/index.ts";
import type { RequiredThicknessView, TableSourceView } from "~/services/circuit-views";
import { Facts } from "./layout";

/** A circuit's design data and required thickness, as the set-up pages show them. */

const mm3 = (mm: number) => `${mm.toFixed(3)} mm (${mmToInch(mm).toFixed(4)} in)`;

/** A circuit's required thickness, what governed it, and the corrosion allowance beside it. */
export function RequiredThickness({ view }: { view: RequiredThicknessView }) {
  if (view.status === "missing")
    return <span className="text-sm text-ink-soft">{`Not yet known: missing ${view.missing.join(", ")}.`}</span>;
  if (view.status === "not-applicable") return <span className="text-sm text-ink-soft">{view.message}</span>;
  const governed =
    view.governedBy === "pressure-design"
      ? `Pressure design, B31.3 eq. 3a (Y ${view.y}${view.yFromTable ? " from Table 304.1.1" : ""}); structural minimum ${view.structuralMinimumMm.toFixed(2)} mm`
      : view.governedBy === "structural-minimum"
        ? `API 574 structural minimum for NPS ${view.nps}; pressure design ${view.pressureDesignMm.toFixed(3)} mm`
        : `Owner’s structural minimum: ${view.ownerReason ?? ""}; pressure design ${view.pressureDesignMm.toFixed(3)} mm`;
  return (
    <div className="min-w-48 text-sm">
      <div className="font-medium tabular-nums">{mm3(view.requiredMm)}</div>
      <div className="text-xs text-ink-soft">{governed}</div>
      <div className="text-xs text-ink-soft">
        {view.corrosionAllowanceMm === null
          ? "No corrosion allowance given."
          : `Corrosion allowance ${view.corrosionAllowanceMm.toFixed(3)} mm, not included.`}
      </div>
    </div>
  );
}

export type DesignSummaryData = {
  nps: string | null;
  schedule: string | null;
  outside_diameter_mm: number | null;
  nominal_wall_mm: number | null;
  mill_tolerance_pct: number | null;
  design_pressure_mpa: number | null;
  design_temperature_c: number | null;
  allowable_stress_mpa: number | null;
  joint_factor_e: number | null;
  weld_factor_w: number | null;
  y_coefficient: number | null;
  corrosion_allowance_mm: number | null;
  piping_class: number | null;
  requiredThickness: RequiredThicknessView;
  tableSource: TableSourceView;
};

const orDash = (v: number | string | null, unit = "") =>
  v === null || v === "" ? "—" : `${v}${unit ? ` ${unit}` : ""}`;

/** The design data of a circuit as facts, with where the pipe dimensions came from. */
export function DesignSummary({ circuit }: { circuit: DesignSummaryData }) {
  const c = circuit;
  const withSource = (value: number | null, source: string | null) =>
    value === null ? "—" : `${value} mm${source ? ` ${source}` : ""}`;
  return (
    <Facts
      items={[
        [
          "NPS and schedule",
          c.nps
            ? `NPS ${c.nps}${c.schedule ? ` · ${/^\d+$/.test(c.schedule) ? `Sch ${c.schedule}` : c.schedule}` : ""}`
            : "—",
        ],
        ["Outside diameter D", withSource(c.outside_diameter_mm, c.tableSource.outsideDiameter)],
        ["Nominal wall", withSource(c.nominal_wall_mm, c.tableSource.nominalWall)],
        ["Mill under-tolerance", orDash(c.mill_tolerance_pct, "%")],
        ["Design pressure P", orDash(c.design_pressure_mpa, "MPa (g)")],
        ["Design temperature", orDash(c.design_temperature_c, "°C")],
        ["Allowable stress S", orDash(c.allowable_stress_mpa, "MPa")],
        ["E · W · Y", `${orDash(c.joint_factor_e)} · ${orDash(c.weld_factor_w)} · ${orDash(c.y_coefficient)}`],
        ["Corrosion allowance", orDash(c.corrosion_allowance_mm, "mm")],
        ["Piping class", c.piping_class === null ? "Not set" : `Class ${c.piping_class}`],
        ["Required thickness", <RequiredThickness key="rt" view={c.requiredThickness} />],
      ]}
    />
  );
}
