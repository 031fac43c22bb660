import { describe, expect, it } from "vitest";
import { thicknessChart, PROJECTION_YEARS_SHOWN } from "../../../app/services/thickness-chart";

// Check values are worked by hand from the inputs (straight lines; 365.25-day years as the
// thickness rates use, see DEVELOPERS.md "mm/y → mpy is exact").
describe("thickness chart series", () => {
  const base = {
    cmlTag: "T-CML-1",
    baseline: { thicknessMm: 7.0, on: "2020-01-01" },
    replacedOn: null,
    readings: [
      { measuredOn: "2022-01-01", thicknessMm: 6.6 },
      { measuredOn: "2024-01-01", thicknessMm: 6.2 },
    ],
    requiredMm: 4.2,
    governingRateMmPerYear: 0.2,
    projectedRequiredOn: "2034-01-01",
  };

  it("puts the base-line first and projects from the last reading to the required thickness", () => {
    const c = thicknessChart(base);
    expect(c.points.map((p) => [p.date, p.kind])).toEqual([
      ["2020-01-01", "baseline"],
      ["2022-01-01", "reading"],
      ["2024-01-01", "reading"],
    ]);
    expect(c.projection?.from.date).toBe("2024-01-01");
    expect(c.projection?.to).toEqual({ day: Date.UTC(2034, 0, 1) / 86400000, date: "2034-01-01", thicknessMm: 4.2 });
    expect(c.projection?.reachesRequired).toBe(true);
    expect(c.projectedBeyond).toBeNull();
    expect(c.xDomain).toEqual([Date.UTC(2020, 0, 1) / 86400000, Date.UTC(2034, 0, 1) / 86400000]);
    // 4.2 … 7.0 with 10 % padding (0.28) each side, to the tenth outside.
    expect(c.yDomain).toEqual([3.9, 7.3]);
  });

  it("stops the projection at the chart's end and names the date beyond it", () => {
    const c = thicknessChart({ ...base, governingRateMmPerYear: 0.01, projectedRequiredOn: "2224-01-01" });
    expect(c.projection?.reachesRequired).toBe(false);
    expect(c.projectedBeyond).toBe("2224-01-01");
    // 25 years at 0.01 mm/y from 6.2 mm (the end is 9131 days on: 25 × 365.25 rounded).
    expect(c.projection?.to.thicknessMm).toBeCloseTo(
      6.2 - (0.01 * Math.round(PROJECTION_YEARS_SHOWN * 365.25)) / 365.25,
      3,
    );
  });

  it("draws readings before a replacement as the earlier component and projects only from the new one", () => {
    const c = thicknessChart({
      ...base,
      baseline: { thicknessMm: 7.1, on: "2023-01-01" },
      replacedOn: "2023-01-01",
      readings: [
        { measuredOn: "2022-01-01", thicknessMm: 5.0 },
        { measuredOn: "2024-01-01", thicknessMm: 7.0 },
      ],
    });
    expect(c.points.map((p) => p.kind)).toEqual(["earlier", "baseline", "reading"]);
    expect(c.projection?.from.thicknessMm).toBe(7.0);
  });

  it("draws no projection without a rate, below required, or without readings", () => {
    expect(thicknessChart({ ...base, governingRateMmPerYear: null }).projection).toBeNull();
    expect(thicknessChart({ ...base, governingRateMmPerYear: 0 }).projection).toBeNull();
    expect(thicknessChart({ ...base, requiredMm: 6.5 }).projection).toBeNull();
    expect(thicknessChart({ ...base, readings: [] }).projection).toBeNull();
    expect(thicknessChart({ ...base, requiredMm: null }).projection).toBeNull();
  });
});
