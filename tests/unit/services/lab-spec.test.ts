import { describe, expect, it } from "vitest";
import { checkLab, parseLabText, parseNumberList, type LabText } from "../../../app/services/lab-spec";
import type { CouponResultInput } from "../../../app/domain/index.ts";

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
    expect(r.errors.pitDepthsMm).toBe("Pit depths: 0,15 — use a point as the decimal mark (0.15).");
    expect(r.errors.baseMetalFromCycle).toMatch(/whole cycle number/);
  });

  it("refuses a gap in the cycles and text over its limit instead of cutting it", () => {
    const r = parseLabText({
      ...blank,
      couponMassesG: ["10.1", "", "10.0"],
      cleaningMethod: "x".repeat(201),
      labNotes: "y".repeat(4001),
    });
    expect(r.errors.couponMassesG).toMatch(/after cycle 2 it is empty/);
    expect(r.errors.cleaningMethod).toMatch(/under 200 characters/);
    expect(r.errors.labNotes).toMatch(/under 4000 characters/);
  });
});

describe("lists of numbers (pit depths)", () => {
  it("takes commas, spaces, semicolons and new lines as separators, in any mix", () => {
    expect(parseNumberList("0.12, 0.09, 0.07")).toEqual({ values: [0.12, 0.09, 0.07], problems: [] });
    expect(parseNumberList("0.12 0.09\t0.07")).toEqual({ values: [0.12, 0.09, 0.07], problems: [] });
    expect(parseNumberList("0.12;0.09; 0.07;")).toEqual({ values: [0.12, 0.09, 0.07], problems: [] });
    expect(parseNumberList("0.12\n0.09\r\n0.07\n")).toEqual({ values: [0.12, 0.09, 0.07], problems: [] });
    expect(parseNumberList("0.12,0.09 ,0.07")).toEqual({ values: [0.12, 0.09, 0.07], problems: [] });
    expect(parseNumberList("  ")).toEqual({ values: [], problems: [] });
  });

  it("names each decimal comma it meets instead of guessing, and each value that is no number", () => {
    const r = parseNumberList("0,35 0.12; 0,2\nabc");
    expect(r.problems).toEqual([
      "0,35 — use a point as the decimal mark (0.35)",
      "0,2 — use a point as the decimal mark (0.2)",
      "'abc' is not a number",
    ]);
    expect(r.values.filter((v) => !Number.isNaN(v))).toEqual([0.12]);
  });

  it("reads the pit depths field through the list parser", () => {
    const r = parseLabText({ ...blank, finalMassG: "35.9", pitDepthsMm: "0.30,0.25\n0.2" });
    expect(r.lab?.pitDepthsMm).toEqual([0.3, 0.25, 0.2]);
  });
});

describe("which masses the rate uses", () => {
  const both = { ...blank, finalMassG: "35.95", couponMassesG: ["35.96", "35.955"] };

  it("refuses a final mass and cleaning-cycle masses together, naming both, unless a method is chosen", () => {
    const r = parseLabText(both);
    expect(r.lab).toBeUndefined();
    expect(r.errors.finalMassG).toMatch(/Both a final mass and masses after cleaning cycles/);
    expect(r.errors.couponMassesG).toMatch(/Both a final mass and masses after cleaning cycles/);
  });

  it("uses only the masses of the method chosen", () => {
    expect(parseLabText({ ...both, massLossMethod: "final-mass" }).lab).toMatchObject({
      finalMassG: 35.95,
      couponMassesG: [],
    });
    expect(parseLabText({ ...both, massLossMethod: "last-cycle" }).lab).toMatchObject({
      finalMassG: null,
      couponMassesG: [35.96, 35.955],
      baseMetalFromCycle: null,
    });
  });

  it("asks for what the chosen method needs", () => {
    expect(parseLabText({ ...blank, massLossMethod: "final-mass" }).errors.finalMassG).toMatch(/Enter the final mass/);
    expect(parseLabText({ ...blank, massLossMethod: "last-cycle" }).errors.couponMassesG).toMatch(
      /each cleaning cycle/,
    );
    const curve = parseLabText({ ...blank, massLossMethod: "cleaning-curve", couponMassesG: ["1", "0.9"] });
    expect(curve.errors.baseMetalFromCycle).toMatch(/first cycle of the base-metal line/);
    expect(parseLabText({ ...blank, massLossMethod: "guess" }).errors.massLossMethod).toMatch(/Choose where/);
  });
});

describe("every problem of the lab form in one round", () => {
  // A 76.2 × 12.7 × 1.6 mm strip, 90 days in service: invented demo inputs, not check values.
  const base: CouponResultInput = {
    geometry: { shape: "strip", lengthMm: 76.2, widthMm: 12.7, thicknessMm: 1.6, holeDiameterMm: 0 },
    densityGcm3: 7.86,
    densitySource: "demo",
    initialMassG: 12,
    balanceResolutionG: 0.0001,
    installedAt: "2026-01-01T00:00:00Z",
    removedAt: "2026-04-01T00:00:00Z",
    couponMassesG: [],
    finalMassG: null,
  };

  it("gathers the parser's messages and the calculation's checks for the fields the parser could read", () => {
    const r = checkLab(base, {
      ...blank,
      couponMassesG: ["11.9", "11.95"], // went up after cleaning: the calculation's check
      blankInitialMassG: "10,5", // the parser's
      blankMassesG: ["10.4"], // one cycle against the coupon's two: the calculation's check
      pitDepthsMm: "0,3; 2.5", // a decimal comma
      labNotes: "n".repeat(4001),
    });
    expect(r.lab).toBeUndefined();
    expect(r.errors).toEqual({
      couponMassesG: expect.stringMatching(/mass went up after cleaning/),
      blankInitialMassG: expect.stringMatching(/Blank mass before cleaning: '10,5' uses a decimal comma/),
      blankMassesG: expect.stringMatching(/The blank has 1 cycle\(s\) but the coupon has 2/),
      pitDepthsMm: "Pit depths: 0,3 — use a point as the decimal mark (0.3).",
      labNotes: expect.stringMatching(/under 4000 characters/),
    });
  });

  it("gives the result when every field is right", () => {
    const r = checkLab(base, { ...blank, finalMassG: "11.9", pitDepthsMm: "0.05, 0.04" });
    expect(r.errors).toEqual({});
    expect(r.result?.massLoss.method).toBe("final-mass");
    expect(r.lab?.pitDepthsMm).toEqual([0.05, 0.04]);
  });
});
