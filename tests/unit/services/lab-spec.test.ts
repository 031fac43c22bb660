import { describe, expect, it } from "vitest";
import { parseLabText, type LabText } from "../../../app/services/lab-spec";

const blank: LabText = {
  cleaningMethod: "",
  couponMassesG: [],
  finalMassG: "",
  blankInitialMassG: "",
  blankMassesG: [],
  baseMetalFromCycle: "",
  pitDepthsMm: "",
  labNotes: "",
};

describe("the one lab-result parser (form, preview, CSV import)", () => {
  it("reads numbers typed with a point and drops empty trailing cycles", () => {
    const r = parseLabText({ ...blank, couponMassesG: ["10.1234", "10.1200", ""], pitDepthsMm: "0.15 0.11;0.2" });
    expect(r.lab).toMatchObject({ couponMassesG: [10.1234, 10.12], finalMassG: null, pitDepthsMm: [0.15, 0.11, 0.2] });
  });

  it("reports every field's problem in one round, naming a decimal comma with the corrected number", () => {
    const r = parseLabText({
      ...blank,
      finalMassG: "35,95",
      blankInitialMassG: "abc",
      pitDepthsMm: "0,15",
      baseMetalFromCycle: "1.5",
    });
    expect(r.lab).toBeUndefined();
    expect(r.errors.finalMassG).toMatch(/Final mass: '35,95' uses a decimal comma; write 35\.95/);
    expect(r.errors.blankInitialMassG).toMatch(/'abc' is not a number/);
    expect(r.errors.pitDepthsMm).toMatch(/Pit depth: '0,15' uses a decimal comma/);
    expect(r.errors.baseMetalFromCycle).toMatch(/whole cycle number/);
  });

  it("refuses a gap in the cycles and text over its limit instead of cutting it", () => {
    const r = parseLabText({
      ...blank,
      couponMassesG: ["10.1", "", "10.0"],
      cleaningMethod: "x".repeat(201),
      labNotes: "y".repeat(4001),
    });
    expect(r.errors.couponMassesG).toMatch(/after cycle 2 is empty/);
    expect(r.errors.cleaningMethod).toMatch(/under 200 characters/);
    expect(r.errors.labNotes).toMatch(/under 4000 characters/);
  });
});
