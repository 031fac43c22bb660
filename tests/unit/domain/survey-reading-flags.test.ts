import { describe, expect, it } from "vitest";
import { surveyReadingFlags, thicknessQualityFlags, type QualityFlag } from "../../../app/domain/index.ts";

const codes = (flags: QualityFlag[]) => flags.map((f) => f.code);

/** A CML losing 0.1 mm/y: 10.0 mm in 2016, 9.6 mm in 2020 (hand-worked: 0.4 mm over 4 years). */
const history = [
  { date: "2016-01-01", thicknessMm: 10 },
  { date: "2020-01-01", thicknessMm: 9.6 },
];

describe("thicknessQualityFlags with the required thickness and the instrument resolution", () => {
  it("a reading at or below the required thickness is a warning (API 570: remaining life ends at t_required)", () => {
    const readings = [...history, { date: "2024-01-01", thicknessMm: 9.2 }];
    // hand-worked: 9.2 mm against a required 9.2 mm is "at", so flagged; against 9.19 mm it is above.
    expect(codes(thicknessQualityFlags(readings, { requiredThicknessMm: 9.2 }))).toEqual(["below-required"]);
    expect(codes(thicknessQualityFlags(readings, { requiredThicknessMm: 9.19 }))).toEqual([]);
    const flag = thicknessQualityFlags(readings, { requiredThicknessMm: 9.5 })[0];
    expect(flag.severity).toBe("warning");
    expect(flag.message).toMatch(/9\.2 mm on 2024-01-01/);
    expect(flag.message).toMatch(/9\.5 mm/);
  });

  it("a change smaller than the instrument resolution is information (hand-worked: 9.60 → 9.55 is 0.05 mm < 0.1 mm)", () => {
    const readings = [...history, { date: "2024-01-01", thicknessMm: 9.55 }];
    const flags = thicknessQualityFlags(readings, { instrumentResolutionMm: 0.1 });
    expect(codes(flags)).toContain("below-resolution");
    expect(flags.find((f) => f.code === "below-resolution")?.severity).toBe("info");
    // 0.05 mm change against a 0.01 mm resolution is measurable: no flag.
    expect(codes(thicknessQualityFlags(readings, { instrumentResolutionMm: 0.01 }))).not.toContain("below-resolution");
  });

  it("a thickness given to a finer step than the resolution is a warning (hand-worked: 9.55 is not a multiple of 0.1)", () => {
    const fine = thicknessQualityFlags([...history, { date: "2024-01-01", thicknessMm: 9.55 }], {
      instrumentResolutionMm: 0.1,
    });
    expect(fine.find((f) => f.code === "finer-than-resolution")?.severity).toBe("warning");
    // 9.52 = 952 × 0.01 (the division is 951.999… in binary; still a whole number of steps).
    expect(
      codes(
        thicknessQualityFlags([...history, { date: "2024-01-01", thicknessMm: 9.52 }], {
          instrumentResolutionMm: 0.01,
        }),
      ),
    ).not.toContain("finer-than-resolution");
  });

  it("without the new options the flags are as before", () => {
    const readings = [...history, { date: "2024-01-01", thicknessMm: 9.2 }];
    expect(thicknessQualityFlags(readings)).toEqual([]);
    expect(thicknessQualityFlags(readings, { requiredThicknessMm: null, instrumentResolutionMm: null })).toEqual([]);
  });

  it("names the option when it is not a positive number", () => {
    expect(() => thicknessQualityFlags(history, { requiredThicknessMm: -1 })).toThrow(/requiredThicknessMm/);
    expect(() => thicknessQualityFlags(history, { instrumentResolutionMm: 0 })).toThrow(/instrumentResolutionMm/);
  });
});

describe("surveyReadingFlags: one new reading against the CML's approved history", () => {
  it("a steady new reading raises no flag (hand-worked: 9.6 → 9.2 over 4 years is 0.1 mm/y, as before)", () => {
    expect(
      surveyReadingFlags({
        reading: { date: "2024-01-01", thicknessMm: 9.2 },
        history,
        requiredThicknessMm: 6,
        instrumentResolutionMm: 0.01,
      }),
    ).toEqual([]);
  });

  it("is the same as thicknessQualityFlags over the history with the reading last", () => {
    const reading = { date: "2024-01-01", thicknessMm: 8.6 }; // hand-worked: 0.25 mm/y after 0.1 mm/y: a jump (factor 2, common practice)
    expect(surveyReadingFlags({ reading, history })).toEqual(thicknessQualityFlags([...history, reading]));
    expect(codes(surveyReadingFlags({ reading, history }))).toEqual(["rate-jump"]);
  });

  it("growth since the last approved reading is a warning", () => {
    const flags = surveyReadingFlags({ reading: { date: "2024-01-01", thicknessMm: 9.8 }, history });
    expect(codes(flags)).toContain("thickness-growth");
  });

  it("the base-line counts as the first point; with only the base-line the pair is the whole history", () => {
    const flags = surveyReadingFlags({
      reading: { date: "2024-01-01", thicknessMm: 9.9 },
      history: [],
      baseline: { date: "2020-01-01", thicknessMm: 10 },
      instrumentResolutionMm: 0.1,
    });
    // hand-worked: 10.0 → 9.9 is 0.1 mm, not less than the 0.1 mm resolution: measurable.
    expect(codes(flags)).toEqual(["few-readings"]);
    const grew = surveyReadingFlags({
      reading: { date: "2024-01-01", thicknessMm: 10.3 },
      history: [],
      baseline: { date: "2020-01-01", thicknessMm: 10 },
    });
    expect(codes(grew)).toEqual(["thickness-growth", "few-readings"]);
  });

  it("a first reading with nothing before it is judged on its own (required thickness and resolution only)", () => {
    expect(surveyReadingFlags({ reading: { date: "2024-01-01", thicknessMm: 9 }, history: [] })).toEqual([]);
    const flags = surveyReadingFlags({
      reading: { date: "2024-01-01", thicknessMm: 2.5, quadrantReadingsMm: [2.5, 2.65, 2.7] },
      history: [],
      requiredThicknessMm: 2.79, // API 574 structural minimum, carbon steel NPS 6–18 (from memory, references.md)
      instrumentResolutionMm: 0.1,
    });
    // hand-worked: 2.65 is not a multiple of 0.1 (26.5 steps); 2.5 and 2.7 are.
    expect(codes(flags)).toEqual(["below-required", "finer-than-resolution"]);
    expect(flags[1].message).toMatch(/^2\.65 mm is given/);
  });

  it("every quadrant reading is judged against the resolution", () => {
    const flags = surveyReadingFlags({
      reading: { date: "2024-01-01", thicknessMm: 9.2, quadrantReadingsMm: [9.25, 9.2, 9.33, 9.4] },
      history,
      instrumentResolutionMm: 0.1,
    });
    expect(flags.find((f) => f.code === "finer-than-resolution")?.message).toMatch(/9\.25 mm, 9\.33 mm are given/);
  });

  it("a base-line on or after the first approved reading adds no span", () => {
    const reading = { date: "2024-01-01", thicknessMm: 9.2 };
    expect(surveyReadingFlags({ reading, history, baseline: { date: "2016-01-01", thicknessMm: 12 } })).toEqual(
      thicknessQualityFlags([...history, reading]),
    );
  });

  it("names the field of a bad input", () => {
    expect(() => surveyReadingFlags({ reading: { date: "2024-13-01", thicknessMm: 9 }, history })).toThrow(
      /reading\.date/,
    );
    expect(() => surveyReadingFlags({ reading: { date: "2024-01-01", thicknessMm: 0 }, history })).toThrow(
      /reading\.thicknessMm/,
    );
    expect(() => surveyReadingFlags({ reading: { date: "2019-01-01", thicknessMm: 9 }, history })).toThrow(/readings/);
  });
});
