import fc from "fast-check";
import { describe, expect, it } from "vitest";
import {
  formatLocal,
  formatLocalDate,
  localDayAndHour,
  localDayInHours,
  localInputToInstant,
  readLocalInput,
  toLocalInput,
} from "../../../app/services/time";

// Check values come from the published daylight-saving rules for 2026:
// - Europe/London: EU summer-time directive 2000/84/EC, clocks change at 01:00 UTC on the
//   last Sunday of March (29 March: 01:00 GMT → 02:00 BST) and of October (25 October:
//   02:00 BST → 01:00 GMT).
// - America/Chicago: US Energy Policy Act of 2005 (15 U.S.C. 260a), 02:00 local on the
//   second Sunday of March (8 March: CST −6 → CDT −5) and the first Sunday of November
//   (1 November: 02:00 CDT → 01:00 CST).
// - Australia/Sydney: NSW Standard Time Act 1987, 02:00 standard on the first Sunday of
//   October (4 October: AEST +10 → AEDT +11) and 03:00 daylight on the first Sunday of
//   April (5 April: 03:00 AEDT → 02:00 AEST).
// The UTC instants below are derived from those offsets.

const ok = (instant: string) => ({ ok: true, instant });

describe("reading a wall time in the site's zone", () => {
  it("reads ordinary times with the zone's offset of the day", () => {
    expect(readLocalInput("2026-07-01T12:00", "Europe/London")).toEqual(ok("2026-07-01T11:00:00.000Z")); // BST +1
    expect(readLocalInput("2026-01-15T12:00", "Europe/London")).toEqual(ok("2026-01-15T12:00:00.000Z")); // GMT
    expect(readLocalInput("2026-01-15T08:00", "America/Chicago")).toEqual(ok("2026-01-15T14:00:00.000Z")); // CST −6
    expect(readLocalInput("2026-07-15T08:00", "America/Chicago")).toEqual(ok("2026-07-15T13:00:00.000Z")); // CDT −5
    expect(readLocalInput("2026-01-15T09:00", "Australia/Sydney")).toEqual(ok("2026-01-14T22:00:00.000Z")); // AEDT +11
    expect(readLocalInput("2026-07-15T09:00", "Australia/Sydney")).toEqual(ok("2026-07-14T23:00:00.000Z")); // AEST +10
    expect(readLocalInput("2026-07-15T09:00:30", "UTC")).toEqual(ok("2026-07-15T09:00:30.000Z"));
  });

  describe("Europe/London", () => {
    it("refuses a time in the skipped hour, in words", () => {
      const r = readLocalInput("2026-03-29T01:30", "Europe/London");
      expect(r).toEqual({
        ok: false,
        problem: "skipped",
        message:
          "01:30 on 2026-03-29 does not exist in Europe/London: clocks go forward at 01:00 (to 02:00); enter the time as shown on the site's clocks.",
      });
      expect(readLocalInput("2026-03-29T01:00", "Europe/London").ok).toBe(false);
      expect(localInputToInstant("2026-03-29T01:59", "Europe/London")).toBeNull();
    });

    it("reads the minutes either side of the skipped hour", () => {
      expect(readLocalInput("2026-03-29T00:59", "Europe/London")).toEqual(ok("2026-03-29T00:59:00.000Z"));
      expect(readLocalInput("2026-03-29T02:00", "Europe/London")).toEqual(ok("2026-03-29T01:00:00.000Z"));
    });

    it("takes the earlier instant in the repeated hour", () => {
      expect(readLocalInput("2026-10-25T01:30", "Europe/London")).toEqual(ok("2026-10-25T00:30:00.000Z")); // BST, not 01:30Z
      expect(readLocalInput("2026-10-25T01:00", "Europe/London")).toEqual(ok("2026-10-25T00:00:00.000Z"));
      expect(readLocalInput("2026-10-25T00:59", "Europe/London")).toEqual(ok("2026-10-24T23:59:00.000Z"));
      expect(readLocalInput("2026-10-25T02:00", "Europe/London")).toEqual(ok("2026-10-25T02:00:00.000Z"));
    });
  });

  describe("America/Chicago", () => {
    it("refuses a time in the skipped hour, in words", () => {
      expect(readLocalInput("2026-03-08T02:30", "America/Chicago")).toEqual({
        ok: false,
        problem: "skipped",
        message:
          "02:30 on 2026-03-08 does not exist in America/Chicago: clocks go forward at 02:00 (to 03:00); enter the time as shown on the site's clocks.",
      });
      expect(readLocalInput("2026-03-08T01:59", "America/Chicago")).toEqual(ok("2026-03-08T07:59:00.000Z"));
      expect(readLocalInput("2026-03-08T03:00", "America/Chicago")).toEqual(ok("2026-03-08T08:00:00.000Z"));
    });

    it("takes the earlier instant in the repeated hour", () => {
      expect(readLocalInput("2026-11-01T01:30", "America/Chicago")).toEqual(ok("2026-11-01T06:30:00.000Z")); // CDT, not 07:30Z
      expect(readLocalInput("2026-11-01T02:00", "America/Chicago")).toEqual(ok("2026-11-01T08:00:00.000Z"));
    });
  });

  describe("Australia/Sydney (southern hemisphere)", () => {
    it("refuses a time in the skipped hour in October, in words", () => {
      expect(readLocalInput("2026-10-04T02:30", "Australia/Sydney")).toEqual({
        ok: false,
        problem: "skipped",
        message:
          "02:30 on 2026-10-04 does not exist in Australia/Sydney: clocks go forward at 02:00 (to 03:00); enter the time as shown on the site's clocks.",
      });
      expect(readLocalInput("2026-10-04T03:00", "Australia/Sydney")).toEqual(ok("2026-10-03T16:00:00.000Z"));
    });

    it("takes the earlier instant in the repeated hour in April", () => {
      expect(readLocalInput("2026-04-05T02:30", "Australia/Sydney")).toEqual(ok("2026-04-04T15:30:00.000Z")); // AEDT, not 16:30Z
      expect(readLocalInput("2026-04-05T03:00", "Australia/Sydney")).toEqual(ok("2026-04-04T17:00:00.000Z"));
    });
  });

  it("says when the text is not a date and time, or the zone is unknown", () => {
    for (const text of [
      "",
      "yesterday",
      "2026-02-30T10:00",
      "2026-13-01T10:00",
      "2026-01-01T24:00",
      "2026-01-01 10:00",
    ]) {
      expect(readLocalInput(text, "Europe/London")).toMatchObject({ ok: false, problem: "not-a-date-time" });
      expect(localInputToInstant(text, "Europe/London")).toBeNull();
    }
    expect(readLocalInput("2026-01-01T10:00", "Mars/Olympus_Mons")).toMatchObject({
      ok: false,
      problem: "unknown-zone",
    });
  });
});

describe("showing an instant in the site's zone", () => {
  it("formats both readings of a repeated hour as the same wall time", () => {
    expect(formatLocal("2026-10-25T00:30:00Z", "Europe/London")).toBe("2026-10-25 01:30");
    expect(formatLocal("2026-10-25T01:30:00Z", "Europe/London")).toBe("2026-10-25 01:30");
    expect(formatLocal(Date.parse("2026-11-01T06:30:00Z"), "America/Chicago")).toBe("2026-11-01 01:30");
    expect(formatLocal(new Date("2026-04-04T15:30:00Z"), "Australia/Sydney")).toBe("2026-04-05 02:30");
  });

  it("formats across the change and the date line", () => {
    expect(formatLocal("2026-03-29T01:00:00Z", "Europe/London")).toBe("2026-03-29 02:00");
    expect(formatLocal("2026-03-29T00:59:00Z", "Europe/London")).toBe("2026-03-29 00:59");
    expect(formatLocalDate("2026-01-14T22:00:00Z", "Australia/Sydney")).toBe("2026-01-15");
    expect(toLocalInput("2026-03-08T08:00:00Z", "America/Chicago")).toBe("2026-03-08T03:00");
  });

  it("shows a dash for an instant that is not one", () => {
    expect(formatLocal("not a date", "Europe/London")).toBe("—");
    expect(formatLocal(Number.NaN, "Europe/London")).toBe("—");
  });

  it("reads back what it shows: the same instant, or the earlier one in a repeated hour (derived)", () => {
    const zones = ["Europe/London", "America/Chicago", "Australia/Sydney", "Asia/Kolkata", "UTC"];
    fc.assert(
      fc.property(
        fc.integer({ min: Date.UTC(2020, 0, 1) / 60_000, max: Date.UTC(2035, 0, 1) / 60_000 }),
        fc.constantFrom(...zones),
        (minutes, zone) => {
          const instant = minutes * 60_000;
          const shown = toLocalInput(instant, zone);
          const read = readLocalInput(shown, zone);
          expect(read.ok).toBe(true);
          if (!read.ok) return;
          const back = Date.parse(read.instant);
          expect(back).toBeLessThanOrEqual(instant);
          expect(instant - back).toBeLessThanOrEqual(60 * 60_000);
          expect(toLocalInput(back, zone)).toBe(shown);
        },
      ),
    );
  });
});

describe("a local hour for daily jobs", () => {
  /** The UTC hours (00–23) of one UTC day at which the zone's clock is in its 06:00 hour. */
  const sixOClockHours = (utcDay: string, zone: string) =>
    Array.from({ length: 24 }, (_, h) => h).filter(
      (h) => localDayInHours(`${utcDay}T${String(h).padStart(2, "0")}:00:00Z`, zone, 6, 7) !== null,
    );

  it("finds 06:00 local at the UTC hour of the day's offset, either side of each clock change", () => {
    // Europe/London: BST (+1) until 01:00 UTC on 25 October, GMT after.
    expect(sixOClockHours("2026-10-24", "Europe/London")).toEqual([5]);
    expect(sixOClockHours("2026-10-25", "Europe/London")).toEqual([6]);
    expect(sixOClockHours("2026-03-28", "Europe/London")).toEqual([6]);
    expect(sixOClockHours("2026-03-29", "Europe/London")).toEqual([5]);
    // America/Chicago: CDT (−5) until 07:00 UTC on 1 November, CST (−6) after.
    expect(sixOClockHours("2026-10-31", "America/Chicago")).toEqual([11]);
    expect(sixOClockHours("2026-11-01", "America/Chicago")).toEqual([12]);
    expect(sixOClockHours("2026-03-07", "America/Chicago")).toEqual([12]);
    expect(sixOClockHours("2026-03-08", "America/Chicago")).toEqual([11]);
    // Half-hour offsets: 06:30 IST is 01:00 UTC (Asia/Kolkata +5:30).
    expect(sixOClockHours("2026-07-01", "Asia/Kolkata")).toEqual([1]);
  });

  it("names the zone's date, not the UTC date, and the window's edges", () => {
    expect(localDayAndHour("2026-11-01T06:30:00Z", "America/Chicago")).toEqual({ day: "2026-11-01", hour: 1 });
    expect(localDayAndHour("2026-11-01T07:30:00Z", "America/Chicago")).toEqual({ day: "2026-11-01", hour: 1 }); // the repeated 01:00 hour
    expect(localDayAndHour("2026-11-01T03:00:00Z", "America/Chicago")).toEqual({ day: "2026-10-31", hour: 22 });
    expect(localDayInHours("2026-11-01T12:00:00Z", "America/Chicago", 6, 12)).toBe("2026-11-01");
    expect(localDayInHours("2026-11-01T17:59:00Z", "America/Chicago", 6, 12)).toBe("2026-11-01"); // 11:59 CST
    expect(localDayInHours("2026-11-01T18:00:00Z", "America/Chicago", 6, 12)).toBeNull(); // 12:00 CST
    expect(localDayInHours("2026-11-01T11:59:00Z", "America/Chicago", 6, 12)).toBeNull(); // 05:59 CST
    expect(localDayAndHour("2026-11-01T12:00:00Z", "Not/AZone")).toBeNull();
    expect(localDayInHours("2026-11-01T12:00:00Z", "Not/AZone", 6, 12)).toBeNull();
  });
});

describe("the process's own time zone", () => {
  // The unit-tz project runs this file with TZ=America/New_York; results must not change.
  it.runIf(process.env.WALLCAST_EXPECT_LOCAL_TZ === "1")("is not UTC in the unit-tz project", () => {
    expect(process.env.TZ).toBe("America/New_York");
    expect(new Date(2026, 0, 1).getTimezoneOffset()).not.toBe(0);
  });
});
