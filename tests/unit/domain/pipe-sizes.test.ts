import { describe, expect, it } from "vitest";
import {
  NUMBERED_SCHEDULES,
  PIPE_SCHEDULES,
  PIPE_SIZE_NPS,
  PIPE_SIZE_SOURCE_TAG,
  STAINLESS_SCHEDULES,
  STANDARD_NPS,
  WEIGHT_CLASSES,
  nominalWallOf,
  normaliseSchedule,
  outsideDiameterOf,
  schedulesOf,
} from "../../../app/domain/index.ts";

/**
 * The pipe tables by their shape (ASME B36.10M / B36.19M, recalled from memory): every size
 * has a diameter, walls grow with the schedule, a schedule gives a wall smaller than the
 * radius. A handful of values are checked, each marked from memory.
 */

describe("pipe sizes (ASME B36.10M / B36.19M, from memory)", () => {
  it("is tagged as recalled, not read in a published copy", () => {
    expect(PIPE_SIZE_SOURCE_TAG).toBe("mem");
  });

  it("covers NPS ⅛ to 24, including every size of the API 574 structural minimum table", () => {
    expect(PIPE_SIZE_NPS[0]).toBe(0.125);
    expect(PIPE_SIZE_NPS[PIPE_SIZE_NPS.length - 1]).toBe(24);
    for (const nps of STANDARD_NPS) expect(outsideDiameterOf(nps), `NPS ${nps}`).toBeGreaterThan(0);
  });

  it("has outside diameters that grow with the NPS", () => {
    const ods = PIPE_SIZE_NPS.map((n) => outsideDiameterOf(n)!);
    for (let i = 1; i < ods.length; i++) expect(ods[i]).toBeGreaterThan(ods[i - 1]);
    // From NPS 14 the outside diameter is the NPS in inches (B36.10M's rule, from memory): 25.4 mm per inch.
    for (const n of PIPE_SIZE_NPS.filter((x) => x >= 14))
      expect(Math.abs(outsideDiameterOf(n)! - n * 25.4)).toBeLessThan(1);
  });

  it("keeps the outside diameter whatever the schedule: the wall grows inwards", () => {
    for (const nps of PIPE_SIZE_NPS) {
      const od = outsideDiameterOf(nps)!;
      for (const s of schedulesOf(nps)) {
        const wall = nominalWallOf(nps, s)!;
        expect(wall, `NPS ${nps} ${s}`).toBeGreaterThan(0);
        expect(wall, `NPS ${nps} ${s}`).toBeLessThan(od / 2);
      }
    }
  });

  it("has walls that grow with the numbered schedule, the S schedule and the weight class at each size", () => {
    for (const nps of PIPE_SIZE_NPS)
      for (const chain of [NUMBERED_SCHEDULES, STAINLESS_SCHEDULES, WEIGHT_CLASSES]) {
        const walls = chain.map((s) => nominalWallOf(nps, s)).filter((w): w is number => w !== undefined);
        for (let i = 1; i < walls.length; i++)
          expect(walls[i], `NPS ${nps} ${chain.join("/")}`).toBeGreaterThan(walls[i - 1]);
      }
  });

  it("has walls that do not shrink as the size grows within one schedule, for the common schedules", () => {
    for (const s of ["40", "80", "160", "10S"]) {
      const walls = PIPE_SIZE_NPS.map((n) => nominalWallOf(n, s)).filter((w): w is number => w !== undefined);
      for (let i = 1; i < walls.length; i++) expect(walls[i], `Sch ${s}`).toBeGreaterThanOrEqual(walls[i - 1]);
    }
  });

  it("makes STD the same as Sch 40 and XS the same as Sch 80 for the small sizes", () => {
    for (const nps of PIPE_SIZE_NPS.filter((n) => n <= 8)) {
      expect(nominalWallOf(nps, "STD")).toBe(nominalWallOf(nps, "40"));
      expect(nominalWallOf(nps, "XS")).toBe(nominalWallOf(nps, "80"));
    }
  });

  it("gives the values engineers quote for common lines (from memory)", () => {
    // NPS 6: OD 168.3 mm, Sch 40 7.11 mm; NPS 4 Sch 80 8.56 mm; NPS 2 Sch 80 5.54 mm — ASME B36.10M, from memory.
    expect(outsideDiameterOf(6)).toBe(168.3);
    expect(nominalWallOf(6, "40")).toBe(7.11);
    expect(nominalWallOf(4, "80")).toBe(8.56);
    expect(nominalWallOf(2, "80")).toBe(5.54);
  });

  it("reads schedules as people write them, and gives nothing for a size or schedule the tables lack", () => {
    expect(normaliseSchedule("Sch 40")).toBe("40");
    expect(normaliseSchedule("sch. 80s")).toBe("80S");
    expect(normaliseSchedule(" xs ")).toBe("XS");
    expect(normaliseSchedule("Schedule 160")).toBe("160");
    expect(normaliseSchedule("45")).toBeUndefined();
    expect(nominalWallOf(30, "40")).toBeUndefined();
    expect(outsideDiameterOf(7)).toBeUndefined();
    expect(nominalWallOf(3.5, "XXS")).toBeUndefined();
    expect(nominalWallOf(24, "40S")).toBeUndefined();
    expect(schedulesOf(2).every((s) => (PIPE_SCHEDULES as readonly string[]).includes(s))).toBe(true);
  });
});
