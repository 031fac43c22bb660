/**
 * Pipe dimensions by nominal pipe size and schedule.
 *
 * - Outside diameter by NPS, ASME B36.10M (welded and seamless wrought steel pipe),
 *   NPS ⅛ to 24, in mm as the standard's metric columns give them [mem].
 * - Nominal wall by NPS and schedule: the numbered schedules 10 … 160, STD, XS and XXS of
 *   ASME B36.10M, and the stainless schedules 5S, 10S, 40S and 80S of ASME B36.19M, for the
 *   sizes where each is listed [mem].
 *
 * Both tables are recalled from memory [mem]: confirm against a licensed copy of the
 * standards before calling a value normative. A schedule a size does not have gives no wall
 * (undefined), never a guess.
 */

import type { SourceTag } from "./materials.ts";

export const PIPE_SIZE_SOURCE = "ASME B36.10M (carbon and alloy steel) and ASME B36.19M (stainless, S schedules)";
export const PIPE_SIZE_SOURCE_TAG: SourceTag = "mem";

/** Schedules in the order they are offered; numbered and S schedules each grow in wall. */
export const PIPE_SCHEDULES = [
  "5S",
  "10S",
  "10",
  "20",
  "30",
  "40",
  "STD",
  "40S",
  "60",
  "XS",
  "80",
  "80S",
  "100",
  "120",
  "140",
  "160",
  "XXS",
] as const;
export type PipeSchedule = (typeof PIPE_SCHEDULES)[number];

/** The numbered schedules in increasing order (wall grows with the number at a given size). */
export const NUMBERED_SCHEDULES: readonly PipeSchedule[] = [
  "10",
  "20",
  "30",
  "40",
  "60",
  "80",
  "100",
  "120",
  "140",
  "160",
];
/** The stainless schedules of B36.19M in increasing order. */
export const STAINLESS_SCHEDULES: readonly PipeSchedule[] = ["5S", "10S", "40S", "80S"];
/** The weight classes in increasing order. */
export const WEIGHT_CLASSES: readonly PipeSchedule[] = ["STD", "XS", "XXS"];

type Row = { nps: number; odMm: number; walls: Partial<Record<PipeSchedule, number>> };

/**
 * One row per NPS: the outside diameter and the walls (mm) of the schedules listed for it
 * [mem]. STD equals Sch 40 to NPS 10 and is 9.53 mm from NPS 12; XS equals Sch 80 to NPS 8
 * and is 12.70 mm from NPS 10; 40S and 80S stop at NPS 12.
 */
const ROWS: readonly Row[] = [
  {
    nps: 0.125,
    odMm: 10.3,
    walls: { "10S": 1.24, "40": 1.73, STD: 1.73, "40S": 1.73, "80": 2.41, XS: 2.41, "80S": 2.41 },
  },
  {
    nps: 0.25,
    odMm: 13.7,
    walls: { "10S": 1.65, "40": 2.24, STD: 2.24, "40S": 2.24, "80": 3.02, XS: 3.02, "80S": 3.02 },
  },
  {
    nps: 0.375,
    odMm: 17.1,
    walls: { "10S": 1.65, "40": 2.31, STD: 2.31, "40S": 2.31, "80": 3.2, XS: 3.2, "80S": 3.2 },
  },
  {
    nps: 0.5,
    odMm: 21.3,
    walls: {
      "5S": 1.65,
      "10S": 2.11,
      "40": 2.77,
      STD: 2.77,
      "40S": 2.77,
      "80": 3.73,
      XS: 3.73,
      "80S": 3.73,
      "160": 4.78,
      XXS: 7.47,
    },
  },
  {
    nps: 0.75,
    odMm: 26.7,
    walls: {
      "5S": 1.65,
      "10S": 2.11,
      "40": 2.87,
      STD: 2.87,
      "40S": 2.87,
      "80": 3.91,
      XS: 3.91,
      "80S": 3.91,
      "160": 5.56,
      XXS: 7.82,
    },
  },
  {
    nps: 1,
    odMm: 33.4,
    walls: {
      "5S": 1.65,
      "10S": 2.77,
      "40": 3.38,
      STD: 3.38,
      "40S": 3.38,
      "80": 4.55,
      XS: 4.55,
      "80S": 4.55,
      "160": 6.35,
      XXS: 9.09,
    },
  },
  {
    nps: 1.25,
    odMm: 42.2,
    walls: {
      "5S": 1.65,
      "10S": 2.77,
      "40": 3.56,
      STD: 3.56,
      "40S": 3.56,
      "80": 4.85,
      XS: 4.85,
      "80S": 4.85,
      "160": 6.35,
      XXS: 9.7,
    },
  },
  {
    nps: 1.5,
    odMm: 48.3,
    walls: {
      "5S": 1.65,
      "10S": 2.77,
      "40": 3.68,
      STD: 3.68,
      "40S": 3.68,
      "80": 5.08,
      XS: 5.08,
      "80S": 5.08,
      "160": 7.14,
      XXS: 10.15,
    },
  },
  {
    nps: 2,
    odMm: 60.3,
    walls: {
      "5S": 1.65,
      "10S": 2.77,
      "40": 3.91,
      STD: 3.91,
      "40S": 3.91,
      "80": 5.54,
      XS: 5.54,
      "80S": 5.54,
      "160": 8.74,
      XXS: 11.07,
    },
  },
  {
    nps: 2.5,
    odMm: 73.0,
    walls: {
      "5S": 2.11,
      "10S": 3.05,
      "40": 5.16,
      STD: 5.16,
      "40S": 5.16,
      "80": 7.01,
      XS: 7.01,
      "80S": 7.01,
      "160": 9.53,
      XXS: 14.02,
    },
  },
  {
    nps: 3,
    odMm: 88.9,
    walls: {
      "5S": 2.11,
      "10S": 3.05,
      "40": 5.49,
      STD: 5.49,
      "40S": 5.49,
      "80": 7.62,
      XS: 7.62,
      "80S": 7.62,
      "160": 11.13,
      XXS: 15.24,
    },
  },
  {
    nps: 3.5,
    odMm: 101.6,
    walls: { "5S": 2.11, "10S": 3.05, "40": 5.74, STD: 5.74, "40S": 5.74, "80": 8.08, XS: 8.08, "80S": 8.08 },
  },
  {
    nps: 4,
    odMm: 114.3,
    walls: {
      "5S": 2.11,
      "10S": 3.05,
      "40": 6.02,
      STD: 6.02,
      "40S": 6.02,
      "80": 8.56,
      XS: 8.56,
      "80S": 8.56,
      "120": 11.13,
      "160": 13.49,
      XXS: 17.12,
    },
  },
  {
    nps: 5,
    odMm: 141.3,
    walls: {
      "5S": 2.77,
      "10S": 3.4,
      "40": 6.55,
      STD: 6.55,
      "40S": 6.55,
      "80": 9.53,
      XS: 9.53,
      "80S": 9.53,
      "120": 12.7,
      "160": 15.88,
      XXS: 19.05,
    },
  },
  {
    nps: 6,
    odMm: 168.3,
    walls: {
      "5S": 2.77,
      "10S": 3.4,
      "40": 7.11,
      STD: 7.11,
      "40S": 7.11,
      "80": 10.97,
      XS: 10.97,
      "80S": 10.97,
      "120": 14.27,
      "160": 18.26,
      XXS: 21.95,
    },
  },
  {
    nps: 8,
    odMm: 219.1,
    walls: {
      "5S": 2.77,
      "10S": 3.76,
      "20": 6.35,
      "30": 7.04,
      "40": 8.18,
      STD: 8.18,
      "40S": 8.18,
      "60": 10.31,
      "80": 12.7,
      XS: 12.7,
      "80S": 12.7,
      "100": 15.09,
      "120": 18.26,
      "140": 20.62,
      "160": 23.01,
      XXS: 22.23,
    },
  },
  {
    nps: 10,
    odMm: 273.0,
    walls: {
      "5S": 3.4,
      "10S": 4.19,
      "20": 6.35,
      "30": 7.8,
      "40": 9.27,
      STD: 9.27,
      "40S": 9.27,
      "60": 12.7,
      XS: 12.7,
      "80S": 12.7,
      "80": 15.09,
      "100": 18.26,
      "120": 21.44,
      "140": 25.4,
      "160": 28.58,
      XXS: 25.4,
    },
  },
  {
    nps: 12,
    odMm: 323.8,
    walls: {
      "5S": 3.96,
      "10S": 4.57,
      "20": 6.35,
      "30": 8.38,
      STD: 9.53,
      "40S": 9.53,
      "40": 10.31,
      XS: 12.7,
      "80S": 12.7,
      "60": 14.27,
      "80": 17.48,
      "100": 21.44,
      "120": 25.4,
      "140": 28.58,
      "160": 33.32,
      XXS: 25.4,
    },
  },
  {
    nps: 14,
    odMm: 355.6,
    walls: {
      "5S": 3.96,
      "10S": 4.78,
      "10": 6.35,
      "20": 7.92,
      "30": 9.53,
      STD: 9.53,
      "40": 11.13,
      XS: 12.7,
      "60": 15.09,
      "80": 19.05,
      "100": 23.83,
      "120": 27.79,
      "140": 31.75,
      "160": 35.71,
    },
  },
  {
    nps: 16,
    odMm: 406.4,
    walls: {
      "5S": 4.19,
      "10S": 4.78,
      "10": 6.35,
      "20": 7.92,
      "30": 9.53,
      STD: 9.53,
      "40": 12.7,
      XS: 12.7,
      "60": 16.66,
      "80": 21.44,
      "100": 26.19,
      "120": 30.96,
      "140": 36.53,
      "160": 40.49,
    },
  },
  {
    nps: 18,
    odMm: 457,
    walls: {
      "5S": 4.19,
      "10S": 4.78,
      "10": 6.35,
      "20": 7.92,
      STD: 9.53,
      "30": 11.13,
      XS: 12.7,
      "40": 14.27,
      "60": 19.05,
      "80": 23.83,
      "100": 29.36,
      "120": 34.93,
      "140": 39.67,
      "160": 45.24,
    },
  },
  {
    nps: 20,
    odMm: 508,
    walls: {
      "5S": 4.78,
      "10S": 5.54,
      "10": 6.35,
      "20": 9.53,
      STD: 9.53,
      "30": 12.7,
      XS: 12.7,
      "40": 15.09,
      "60": 20.62,
      "80": 26.19,
      "100": 32.54,
      "120": 38.1,
      "140": 44.45,
      "160": 50.01,
    },
  },
  {
    nps: 22,
    odMm: 559,
    walls: {
      "5S": 4.78,
      "10S": 5.54,
      "10": 6.35,
      "20": 9.53,
      STD: 9.53,
      "30": 12.7,
      XS: 12.7,
      "60": 22.23,
      "80": 28.58,
      "100": 34.93,
      "120": 41.28,
      "140": 47.63,
      "160": 53.98,
    },
  },
  {
    nps: 24,
    odMm: 610,
    walls: {
      "5S": 5.54,
      "10S": 6.35,
      "10": 6.35,
      "20": 9.53,
      STD: 9.53,
      XS: 12.7,
      "30": 14.27,
      "40": 17.48,
      "60": 24.61,
      "80": 30.96,
      "100": 38.89,
      "120": 46.02,
      "140": 52.37,
      "160": 59.54,
    },
  },
];

/** The sizes the tables cover, smallest first. */
export const PIPE_SIZE_NPS: readonly number[] = ROWS.map((r) => r.nps);

const rowOf = (nps: number) => ROWS.find((r) => r.nps === nps);

/**
 * A schedule as people write it ("40", "Sch 40", "sch. 80s", "xs", "Std") in the table's
 * spelling, or undefined when it is not one of the table's schedules.
 */
export function normaliseSchedule(text: string): PipeSchedule | undefined {
  const s = text
    .trim()
    .toUpperCase()
    .replace(/^SCH(EDULE)?\.?\s*/, "")
    .replace(/\s+/g, "");
  return (PIPE_SCHEDULES as readonly string[]).includes(s) ? (s as PipeSchedule) : undefined;
}

/** Outside diameter of a nominal pipe size, mm (ASME B36.10M [mem]); undefined outside NPS ⅛–24. */
export function outsideDiameterOf(nps: number): number | undefined {
  return rowOf(nps)?.odMm;
}

/**
 * Nominal wall of a size in a schedule, mm (ASME B36.10M / B36.19M [mem]); undefined when the
 * size or the schedule is not in the table, or the size is not made in that schedule.
 */
export function nominalWallOf(nps: number, schedule: string): number | undefined {
  const s = normaliseSchedule(schedule);
  return s === undefined ? undefined : rowOf(nps)?.walls[s];
}

/** The schedules listed for a size, in PIPE_SCHEDULES order. */
export function schedulesOf(nps: number): PipeSchedule[] {
  const row = rowOf(nps);
  return row ? PIPE_SCHEDULES.filter((s) => row.walls[s] !== undefined) : [];
}
