/**
 * Calendar dates as whole-day numbers.
 *
 * Standards: ISO 8601 calendar dates in the extended form "YYYY-MM-DD"
 * (proleptic Gregorian calendar). Thickness rates (API 570) and inspection
 * due dates only need whole days, so dates are parsed to an integer day
 * count (days since 1970-01-01) with plain arithmetic — no Date objects, no
 * time zones, nothing that can shift a day on a server in another zone, and
 * fast enough for a fleet recompute.
 *
 * The day-number conversion is the well-known "days from civil" algorithm
 * (March-based years, 400-year eras) [der: follows from the Gregorian rules].
 */

import { rangeError } from "./validate.ts";

/** Days in each month of a common year, January first. */
const DAYS_IN_MONTH = [31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31];

function isLeapYear(year: number): boolean {
  return (year % 4 === 0 && year % 100 !== 0) || year % 400 === 0;
}

/** Day number (days since 1970-01-01, negative before) of a valid Gregorian date. */
function dayNumberFromCivil(year: number, month: number, day: number): number {
  const y = month <= 2 ? year - 1 : year;
  const era = Math.floor(y / 400);
  const yearOfEra = y - era * 400; // [0, 399]
  const monthFromMarch = month > 2 ? month - 3 : month + 9; // [0, 11]
  const dayOfYear = Math.floor((153 * monthFromMarch + 2) / 5) + day - 1; // [0, 365]
  const dayOfEra = yearOfEra * 365 + Math.floor(yearOfEra / 4) - Math.floor(yearOfEra / 100) + dayOfYear;
  return era * 146097 + dayOfEra - 719468;
}

/**
 * Parses a strict "YYYY-MM-DD" string (years 0001–9999, real month and day,
 * leap years honoured) to its day number. Anything else — "2024-2-1",
 * "2024-02-30", "2024-02-01T00:00", a Date object — is a RangeError naming
 * `name`.
 */
export function parseIsoDay(name: string, value: unknown): number {
  if (typeof value !== "string" || value.length !== 10) throw dateError(name, value);
  // Character codes instead of a regular expression or Date: this runs on the hot path.
  const c4 = value.charCodeAt(4);
  const c7 = value.charCodeAt(7);
  if (c4 !== 45 || c7 !== 45) throw dateError(name, value);
  const year = digits(value, 0, 4);
  const month = digits(value, 5, 2);
  const day = digits(value, 8, 2);
  if (year < 1 || month < 1 || month > 12 || day < 1) throw dateError(name, value);
  const monthLength = month === 2 && isLeapYear(year) ? 29 : DAYS_IN_MONTH[month - 1];
  if (day > monthLength) throw dateError(name, value);
  return dayNumberFromCivil(year, month, day);
}

/** Reads `count` ASCII digits starting at `start`; -1 when any is not a digit. */
function digits(text: string, start: number, count: number): number {
  let result = 0;
  for (let i = start; i < start + count; i++) {
    const d = text.charCodeAt(i) - 48;
    if (d < 0 || d > 9) return -1;
    result = result * 10 + d;
  }
  return result;
}

function dateError(name: string, value: unknown): RangeError {
  return rangeError(name, 'a calendar date "YYYY-MM-DD"', value);
}

/** Year, month and day of a day number (the inverse of dayNumberFromCivil). */
function civilFromDayNumber(dayNumber: number): [number, number, number] {
  const z = dayNumber + 719468;
  const era = Math.floor(z / 146097);
  const dayOfEra = z - era * 146097; // [0, 146096]
  const yearOfEra = Math.floor(
    (dayOfEra - Math.floor(dayOfEra / 1460) + Math.floor(dayOfEra / 36524) - Math.floor(dayOfEra / 146096)) / 365,
  );
  const dayOfYear = dayOfEra - (365 * yearOfEra + Math.floor(yearOfEra / 4) - Math.floor(yearOfEra / 100));
  const monthFromMarch = Math.floor((5 * dayOfYear + 2) / 153);
  const day = dayOfYear - Math.floor((153 * monthFromMarch + 2) / 5) + 1;
  const month = monthFromMarch < 10 ? monthFromMarch + 3 : monthFromMarch - 9;
  return [yearOfEra + era * 400 + (month <= 2 ? 1 : 0), month, day];
}

/** Formats a day number back to "YYYY-MM-DD" (the inverse of parseIsoDay). */
export function formatIsoDay(dayNumber: number): string {
  if (!Number.isInteger(dayNumber)) throw rangeError("dayNumber", "an integer", dayNumber);
  const [year, month, day] = civilFromDayNumber(dayNumber);
  if (year < 1 || year > 9999) throw rangeError("dayNumber", "within the years 0001 to 9999", dayNumber);
  return pad4(year) + (month < 10 ? "-0" : "-") + month + (day < 10 ? "-0" : "-") + day;
}

function pad4(year: number): string {
  if (year >= 1000) return String(year);
  if (year >= 100) return "0" + year;
  if (year >= 10) return "00" + year;
  return "000" + year;
}

/**
 * The day number `years` whole calendar years after `dayNumber`: the same month and
 * day, so 2026-03-01 + 10 years is 2036-03-01. 29 February in a year that lands on a
 * common year becomes 28 February, the last day of that month [cp].
 */
export function addCalendarYears(dayNumber: number, years: number): number {
  if (!Number.isInteger(years)) throw rangeError("years", "an integer", years);
  if (!Number.isInteger(dayNumber)) throw rangeError("dayNumber", "an integer", dayNumber);
  const [year, month, day] = civilFromDayNumber(dayNumber);
  const target = year + years;
  if (target < 1 || target > 9999) throw rangeError("years", "a count that stays within the years 0001 to 9999", years);
  const lastDay = month === 2 && isLeapYear(target) ? 29 : DAYS_IN_MONTH[month - 1];
  return dayNumberFromCivil(target, month, Math.min(day, lastDay));
}

/** True when `value` is a strict "YYYY-MM-DD" calendar date. */
export function isIsoDay(value: unknown): boolean {
  try {
    parseIsoDay("date", value);
    return true;
  } catch {
    return false;
  }
}

/** Whole days from `from` to `to` (negative when `to` is earlier). */
export function daysBetween(from: string, to: string): number {
  return parseIsoDay("to", to) - parseIsoDay("from", from);
}

/** The date `days` whole days after `date`. */
export function addDays(date: string, days: number): string {
  if (!Number.isInteger(days)) throw rangeError("days", "an integer", days);
  return formatIsoDay(parseIsoDay("date", date) + days);
}
