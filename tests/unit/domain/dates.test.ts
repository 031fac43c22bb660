import { describe, it, expect } from "vitest";
import fc from "fast-check";
import { parseIsoDay, formatIsoDay, isIsoDay, daysBetween, addDays } from "../../../app/domain/index.ts";

const MS_PER_DAY = 86_400_000;

/** Day number of 1 January of `year` by the oracle (setUTCFullYear, because Date.UTC maps years 0–99 to 1900–1999). */
function oracleDay(year: number, monthIndex: number, day: number): number {
  const d = new Date(0);
  d.setUTCFullYear(year, monthIndex, day);
  return d.getTime() / MS_PER_DAY;
}

describe("ISO calendar dates as day numbers", () => {
  it("1970-01-01 is day 0 (the epoch, by definition)", () => {
    expect(parseIsoDay("date", "1970-01-01")).toBe(0);
    expect(formatIsoDay(0)).toBe("1970-01-01");
  });

  it("2000 is a leap year, 1900 and 2100 are not (Gregorian rule, derived)", () => {
    expect(daysBetween("2000-02-28", "2000-03-01")).toBe(2);
    expect(daysBetween("1900-02-28", "1900-03-01")).toBe(1);
    expect(daysBetween("2100-02-28", "2100-03-01")).toBe(1);
    expect(daysBetween("2024-01-01", "2025-01-01")).toBe(366);
  });

  it("400 Gregorian years are exactly 146 097 days (derived from the calendar rules)", () => {
    expect(daysBetween("1600-01-01", "2000-01-01")).toBe(146097);
  });

  it("agrees with an independent oracle, Date.UTC, on every day from year 1 to 9999 (property)", () => {
    fc.assert(
      fc.property(fc.integer({ min: oracleDay(1, 0, 1), max: oracleDay(9999, 11, 31) }), (day) => {
        const iso = new Date(day * MS_PER_DAY).toISOString().slice(0, 10);
        expect(parseIsoDay("date", iso)).toBe(day);
        expect(formatIsoDay(day)).toBe(iso);
      }),
      { numRuns: 2000 },
    );
  });

  it("addDays crosses month and year ends (derived from the calendar)", () => {
    expect(addDays("2023-12-31", 1)).toBe("2024-01-01");
    expect(addDays("2024-02-28", 1)).toBe("2024-02-29");
    expect(addDays("2024-03-01", -1)).toBe("2024-02-29");
  });

  it.each([
    ["2024-2-01", "month without leading zero"],
    ["2024-02-30", "February 30th"],
    ["2023-02-29", "February 29th of a common year"],
    ["2024-13-01", "month 13"],
    ["2024-00-10", "month 0"],
    ["2024-01-00", "day 0"],
    ["0000-01-01", "year 0"],
    ["2024-01-01T00:00:00Z", "a date-time"],
    ["2024/01/01", "slashes"],
    ["20240101", "basic format"],
    [" 2024-01-1", "padding"],
    ["２０２４-01-01", "full-width digits"],
  ])("rejects %s (%s) with a RangeError naming the field", (text) => {
    expect(() => parseIsoDay("inspectedOn", text)).toThrow(RangeError);
    expect(() => parseIsoDay("inspectedOn", text)).toThrow(/^inspectedOn must be a calendar date "YYYY-MM-DD"/);
    expect(isIsoDay(text)).toBe(false);
  });

  it("rejects non-strings, including Date objects", () => {
    expect(() => parseIsoDay("date", new Date(0))).toThrow(/^date must be a calendar date/);
    expect(() => parseIsoDay("date", 20240101)).toThrow(RangeError);
    expect(() => parseIsoDay("date", undefined)).toThrow(RangeError);
  });

  it("formatIsoDay and addDays refuse fractional days and years beyond 9999", () => {
    expect(() => formatIsoDay(1.5)).toThrow(/^dayNumber /);
    expect(() => formatIsoDay(3_000_000)).toThrow(/^dayNumber /);
    expect(() => addDays("2024-01-01", 0.5)).toThrow(/^days /);
  });
});
