import { describe, it, expect } from "vitest";
import {
  couponQualityFlags,
  thicknessQualityFlags,
  QUALITY_DEFAULTS,
  DEFAULT_MINIMUM_EXPOSURE_DAYS,
  historyJumpFlag,
} from "../../../app/domain/index.ts";
import type { QualityFlag } from "../../../app/domain/index.ts";

const codes = (flags: QualityFlag[]) => flags.map((f) => f.code);

/** A clean 90-day coupon result: no flag expected. Thresholds below are the library's common-practice defaults. */
const clean = {
  massLossG: 0.1,
  exposureHours: 90 * 24,
  balanceResolutionG: 0.0001,
  blankLossG: 0.001,
  pittingObserved: false,
  maxPitDepthMm: 0,
  areaCm2: 22.2,
  densityGcm3: 7.86,
};

describe("couponQualityFlags", () => {
  it("a clean result raises no flag", () => {
    expect(couponQualityFlags(clean)).toEqual([]);
  });

  it("every flag has a code, a severity and a plain-words message", () => {
    const flags = couponQualityFlags({ ...clean, massLossG: -0.002, exposureHours: 10 * 24 });
    for (const f of flags) {
      expect(["warning", "info"]).toContain(f.severity);
      expect(f.message.length).toBeGreaterThan(20);
    }
  });

  it("mass gain is a warning, never a negative rate", () => {
    const flags = couponQualityFlags({ ...clean, massLossG: -0.002 });
    expect(codes(flags)).toContain("mass-gain");
    expect(flags.find((f) => f.code === "mass-gain")?.severity).toBe("warning");
  });

  it("exposure shorter than the owner's minimum (one default: 30 days, the owner's default setting, common practice)", () => {
    expect(DEFAULT_MINIMUM_EXPOSURE_DAYS).toBe(30);
    expect(QUALITY_DEFAULTS.minimumExposureHours).toBe(DEFAULT_MINIMUM_EXPOSURE_DAYS * 24);
    expect(codes(couponQualityFlags({ ...clean, exposureHours: 29 * 24 }))).toContain("exposure-short");
    expect(codes(couponQualityFlags({ ...clean, exposureHours: 30 * 24 }))).not.toContain("exposure-short");
    expect(
      codes(couponQualityFlags({ ...clean, exposureHours: 30 * 24, minimumExposureHours: 28 * 24 })),
    ).not.toContain("exposure-short");
    expect(codes(couponQualityFlags({ ...clean, minimumExposureHours: 120 * 24 }))).toContain("exposure-short");
  });

  it("loss at or below the balance resolution is a warning; under 10× it is information (common practice)", () => {
    expect(codes(couponQualityFlags({ ...clean, massLossG: 0.0001, blankLossG: 0 }))).toContain(
      "loss-below-resolution",
    );
    const near = couponQualityFlags({ ...clean, massLossG: 0.0005, blankLossG: 0 });
    expect(codes(near)).toEqual(["loss-near-resolution"]);
    expect(near[0].severity).toBe("info");
  });

  it("a blank loss of half the coupon's or more is flagged (common practice)", () => {
    // Compared with the RAW loss (before the blank is subtracted): 0.05 of a raw 0.1 g is half.
    const raw = (blank: number) => ({ ...clean, rawMassLossG: 0.1, blankLossG: blank, massLossG: 0.1 - blank });
    expect(codes(couponQualityFlags(raw(0.05)))).toContain("loss-near-blank");
    expect(codes(couponQualityFlags(raw(0.049)))).not.toContain("loss-near-blank");
    // 0.04 g against a corrected 0.06 g would be two thirds; against the raw 0.1 g it is below half.
    expect(codes(couponQualityFlags(raw(0.04)))).not.toContain("loss-near-blank");
  });

  it("'no pitting' recorded but the lab's pit gives a pitting factor ≥ 2 is flagged (limit: common practice; factor derived)", () => {
    // Average penetration 0.1 g / (7.86 × 22.2) cm = 0.00573 mm; a 0.05 mm pit is a factor of ≈ 8.7.
    const flags = couponQualityFlags({ ...clean, maxPitDepthMm: 0.05 });
    expect(codes(flags)).toContain("pitting-not-observed");
    expect(flags.find((f) => f.code === "pitting-not-observed")?.message).toMatch(/pitting factor/);
  });

  it("a shallow pit consistent with general attack (factor < 2, common practice) is not flagged against 'no pitting'", () => {
    expect(codes(couponQualityFlags({ ...clean, maxPitDepthMm: 0.008 }))).not.toContain("pitting-not-observed");
  });

  it("pitting recorded without a pit depth is information", () => {
    const flags = couponQualityFlags({ ...clean, pittingObserved: true, maxPitDepthMm: undefined });
    expect(codes(flags)).toEqual(["pit-depth-missing"]);
  });

  it("a deepest pit shallower than the average penetration (factor < 1) is information", () => {
    expect(codes(couponQualityFlags({ ...clean, pittingObserved: true, maxPitDepthMm: 0.002 }))).toContain(
      "pitting-factor-below-one",
    );
  });

  it("warnings come before information", () => {
    const flags = couponQualityFlags({ ...clean, massLossG: 0.0005, blankLossG: 0, exposureHours: 20 * 24 });
    expect(codes(flags)).toEqual(["exposure-short", "loss-near-resolution"]);
  });

  it("invalid inputs throw RangeError naming the field", () => {
    expect(() => couponQualityFlags({ ...clean, massLossG: Number.NaN })).toThrow(/^massLossG must be a finite number/);
    expect(() => couponQualityFlags({ ...clean, exposureHours: 0 })).toThrow(/^exposureHours must be > 0/);
    expect(() => couponQualityFlags({ ...clean, balanceResolutionG: 0 })).toThrow(/^balanceResolutionG must be > 0/);
    expect(() => couponQualityFlags({ ...clean, blankLossG: -1 })).toThrow(/^blankLossG must be >= 0/);
    expect(() => couponQualityFlags({ ...clean, maxPitDepthMm: -1 })).toThrow(/^maxPitDepthMm must be >= 0/);
    expect(() => couponQualityFlags({ ...clean, pittingObserved: "no" as never })).toThrow(
      /^pittingObserved must be true or false/,
    );
    expect(() => couponQualityFlags(undefined as never)).toThrow(/^input must be an object/);
  });
});

describe("thicknessQualityFlags", () => {
  const steady = [
    { date: "2016-01-01", thicknessMm: 10 },
    { date: "2020-01-01", thicknessMm: 9.6 },
    { date: "2024-01-01", thicknessMm: 9.2 },
  ];

  it("a steady history raises no flag", () => {
    expect(thicknessQualityFlags(steady)).toEqual([]);
  });

  it("growth between surveys is a warning naming both dates", () => {
    const flags = thicknessQualityFlags([
      { date: "2016-01-01", thicknessMm: 10 },
      { date: "2020-01-01", thicknessMm: 10.2 },
      { date: "2024-01-01", thicknessMm: 9.8 },
    ]);
    const growth = flags.find((f) => f.code === "thickness-growth");
    expect(growth?.severity).toBe("warning");
    expect(growth?.message).toMatch(/2020-01-01/);
    expect(growth?.message).toMatch(/2016-01-01/);
  });

  it("growth within the measurement tolerance is not flagged", () => {
    const readings = [
      { date: "2016-01-01", thicknessMm: 10 },
      { date: "2020-01-01", thicknessMm: 10.05 },
      { date: "2024-01-01", thicknessMm: 9.9 },
    ];
    expect(codes(thicknessQualityFlags(readings))).toContain("thickness-growth");
    expect(codes(thicknessQualityFlags(readings, { measurementToleranceMm: 0.1 }))).not.toContain("thickness-growth");
  });

  it("a latest interval losing wall more than twice as fast as the history is a jump (factor 2: common practice)", () => {
    const flags = thicknessQualityFlags([
      { date: "2016-01-01", thicknessMm: 10 },
      { date: "2020-01-01", thicknessMm: 9.8 }, // 0.05 mm/y
      { date: "2024-01-01", thicknessMm: 9.0 }, // 0.2 mm/y
    ]);
    expect(codes(flags)).toEqual(["rate-jump"]);
    expect(codes(thicknessQualityFlags(steady, { jumpFactor: 0.5 }))).toEqual(["rate-jump"]);
  });

  it("the initial thickness counts as the first point of the history (growth from it, then loss after no earlier loss)", () => {
    const flags = thicknessQualityFlags(
      [
        { date: "2020-01-01", thicknessMm: 9.4 },
        { date: "2024-01-01", thicknessMm: 9.0 },
      ],
      { initial: { date: "2016-01-01", thicknessMm: 9.2 } },
    );
    expect(codes(flags)).toEqual(["thickness-growth", "rate-jump"]);
    expect(flags[1].message).toMatch(/earlier readings showed no loss/);
  });

  it("only two values is information: no history to compare", () => {
    const flags = thicknessQualityFlags(steady.slice(0, 2));
    expect(codes(flags)).toEqual(["few-readings"]);
    expect(flags[0].severity).toBe("info");
  });

  it("invalid readings throw the same RangeErrors as thicknessRates", () => {
    expect(() => thicknessQualityFlags([steady[1], steady[0]])).toThrow(/^readings\[1\]\.date must be later/);
    expect(() => thicknessQualityFlags(steady, { measurementToleranceMm: -1 })).toThrow(
      /^options.measurementToleranceMm must be >= 0/,
    );
    expect(() => thicknessQualityFlags(steady, { jumpFactor: 0 })).toThrow(/^options.jumpFactor must be > 0/);
  });
});

describe("historyJumpFlag — a coupon rate against the point's approved history (common practice: factor 2)", () => {
  it("flags a rate at least twice the median of the history, naming both numbers", () => {
    const flag = historyJumpFlag(0.3, [0.1, 0.12, 0.14]);
    expect(flag?.code).toBe("history-jump");
    expect(flag?.severity).toBe("warning");
    expect(flag?.message).toMatch(
      /general rate of 0\.3 mm\/y is 2\.5 times the median of this point's 3 earlier approved general rates \(0\.12 mm\/y\)/,
    );
  });
  it("checks a pitting rate against the point's pitting history with its own code and words", () => {
    // Median of [0.2, 0.25, 0.3] is 0.25 mm/y; 0.6 / 0.25 = 2.4 ≥ 2 (arithmetic).
    const flag = historyJumpFlag(0.6, [0.3, 0.2, 0.25], undefined, "pitting");
    expect(flag?.code).toBe("pitting-history-jump");
    expect(flag?.severity).toBe("warning");
    expect(flag?.message).toMatch(/pitting rate of 0\.6 mm\/y is 2\.4 times the median/);
    expect(flag?.message).toMatch(/pit depths/);
    expect(historyJumpFlag(0.4, [0.3, 0.2, 0.25], undefined, "pitting")).toBeNull();
  });
  it("flags a rate at most half the median", () => {
    expect(historyJumpFlag(0.05, [0.12, 0.1])?.message).toMatch(/only 45\.5 % of/);
  });
  it("stays quiet inside the band, with fewer than two earlier results, or a zero median", () => {
    expect(historyJumpFlag(0.2, [0.1, 0.12, 0.14])).toBeNull();
    expect(historyJumpFlag(5, [0.1])).toBeNull();
    expect(historyJumpFlag(5, [0, 0, 0])).toBeNull();
  });
  it("refuses a negative rate or a non-array history with a RangeError naming the field", () => {
    expect(() => historyJumpFlag(-1, [0.1, 0.2])).toThrow(/^rateMmPerYear/);
    expect(() => historyJumpFlag(0.1, "x" as unknown as number[])).toThrow(/^historyMmPerYear/);
  });
});
