import { describe, expect, it } from "vitest";
import { auditActionWords, auditChanges, auditFieldWords } from "~/services/audit-words";

const si = { units: "si" as const, timeZone: "America/Chicago" };
const us = { units: "us" as const, timeZone: "America/Chicago" };

describe("audit events in words", () => {
  it("names actions and fields in words, and spells out keys it does not know", () => {
    expect(auditActionWords("submission.approved")).toBe("approved");
    expect(auditActionWords("something.new")).toBe("something.new");
    expect(auditFieldWords("planned_exposure_days")).toBe("planned exposure");
    expect(auditFieldWords("someNewField_here")).toBe("some new field here");
  });

  it("rounds a stored rate and shows it in the reader's units", () => {
    const change = { before: { mmPerYear: 0.12 }, after: { mmPerYear: 0.34984438954891595 } };
    expect(auditChanges(change.before, change.after, si)).toEqual([
      { field: "general rate", before: "0.120 mm/y", after: "0.350 mm/y" },
    ]);
    // 0.34984438954891595 mm/y ÷ 0.0254 mm per mil = 13.7734 mpy (1 mil = 0.0254 mm exactly, by definition of the inch).
    expect(auditChanges(change.before, change.after, us)).toEqual([
      { field: "general rate", before: "4.72 mpy", after: "13.77 mpy" },
    ]);
  });

  it("opens nested values one line per changed field, with one unit after a list", () => {
    const before = { lab: { finalMassG: 10.1, pitDepthsMm: [0.1, 0.2], cleaningMethod: "C.3.1" } };
    const after = { lab: { finalMassG: 10.12345678, pitDepthsMm: [0.1, 0.25], cleaningMethod: "C.3.1" } };
    expect(auditChanges(before, after, si)).toEqual([
      { field: "lab results › final mass", before: "10.1000 g", after: "10.1235 g" },
      { field: "lab results › pit depths", before: "0.1, 0.2 mm", after: "0.1, 0.25 mm" },
    ]);
  });

  it("shows thresholds, instants in the reader's zone, materials by name, roles and ids briefly", () => {
    const changes = auditChanges(
      { generalThresholds: { moderate: 0.025, high: 0.12, severe: 0.25 }, role: "plant_manager" },
      {
        generalThresholds: { moderate: 0.03, high: 0.12, severe: 0.25 },
        role: "integrity_engineer",
        removed_at: "2026-11-03T20:20:00.000Z",
        material_code: "carbon-steel",
        by: "0b9c6c1e-7f5a-4d6e-9a51-3c2f1b0e8d7a",
        pitting_visible: true,
        status: "in_service",
      },
      si,
    );
    expect(changes).toEqual([
      { field: "general-rate thresholds › moderate from", before: "0.025 mm/y", after: "0.030 mm/y" },
      { field: "role", before: "Plant manager", after: "Integrity engineer" },
      // 20:20 UTC on 3 November 2026 is 14:20 CST (UTC−6; US daylight time ended on 1 November 2026).
      { field: "removed", before: null, after: "2026-11-03 14:20" },
      { field: "material", before: null, after: "Carbon steel (C1018 coupon)" },
      { field: "superseded by", before: null, after: "0b9c6c1e…" },
      { field: "pitting visible", before: null, after: "yes" },
      { field: "status", before: null, after: "in service" },
    ]);
  });

  it("lists nothing when nothing differs, and a bare value as 'value'", () => {
    expect(auditChanges({ a: 1 }, { a: 1 }, si)).toEqual([]);
    expect(auditChanges(null, "x", si)).toEqual([{ field: "value", before: null, after: "x" }]);
  });
});
