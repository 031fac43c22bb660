import { TZDate, tzOffset } from "@date-fns/tz";

/**
 * Instants shown and entered in a site's own time zone, in ISO form: the one time-zone
 * helper. Pure (@date-fns/tz over Intl), so forms and the server agree, and independent
 * of the time zone the Node process or the browser runs in.
 *
 * Daylight-saving changes, when a wall time is read in a site's zone:
 * - A wall time in the repeated hour (clocks go back, e.g. 01:30 on 2026-10-25 in
 *   Europe/London happens twice) is read as the EARLIER of the two instants, the first
 *   time the site's clocks showed it.
 * - A wall time in the skipped hour (clocks go forward, e.g. 01:30 on 2026-03-29 in
 *   Europe/London never happens) is REFUSED with a message in words; it is not moved
 *   to a nearby instant. The library would quietly move it, so each reading is
 *   converted back to wall time and compared with what was typed.
 */

const MINUTE = 60_000;
const DAY = 86_400_000;

type Wall = { year: number; month: number; day: number; hour: number; minute: number; second: number };

const pad = (n: number, width = 2) => String(n).padStart(width, "0");

/** The wall clock in the zone at the instant, or null for an unknown zone or instant. */
function wallAt(instant: number, timeZone: string): Wall | null {
  if (!Number.isFinite(instant)) return null;
  const d = new TZDate(instant, timeZone);
  if (Number.isNaN(d.getTime())) return null;
  return {
    year: d.getFullYear(),
    month: d.getMonth() + 1,
    day: d.getDate(),
    hour: d.getHours(),
    minute: d.getMinutes(),
    second: d.getSeconds(),
  };
}

/** A wall time written as if it were UTC, so two wall times compare as numbers. */
const wallMs = (w: Wall) => Date.UTC(w.year, w.month - 1, w.day, w.hour, w.minute, w.second);

const toMs = (instant: string | number | Date) => (typeof instant === "number" ? instant : new Date(instant).getTime());

/** "2026-11-03 14:20" in the zone. */
export function formatLocal(instant: string | number | Date, timeZone: string): string {
  const w = wallAt(toMs(instant), timeZone);
  if (!w) return "—";
  return `${pad(w.year, 4)}-${pad(w.month)}-${pad(w.day)} ${pad(w.hour)}:${pad(w.minute)}`;
}

/** "2026-11-03" in the zone. */
export function formatLocalDate(instant: string | number | Date, timeZone: string): string {
  return formatLocal(instant, timeZone).slice(0, 10);
}

/**
 * The site's calendar date and clock hour at the instant ({ day: "2026-11-01", hour: 6 }),
 * or null for an unknown zone or instant: for jobs that run at a local hour.
 */
export function localDayAndHour(
  instant: string | number | Date,
  timeZone: string,
): { day: string; hour: number } | null {
  const w = wallAt(toMs(instant), timeZone);
  if (!w) return null;
  return { day: `${pad(w.year, 4)}-${pad(w.month)}-${pad(w.day)}`, hour: w.hour };
}

/**
 * For a job that runs every hour to do something once a local day from a local hour on:
 * the zone's date at the instant when its clock then reads from `fromHour`:00 up to (not
 * including) `untilHour`:00, else null. Clock changes move the UTC hour, not the local one.
 */
export function localDayInHours(
  instant: string | number | Date,
  timeZone: string,
  fromHour: number,
  untilHour: number,
): string | null {
  const local = localDayAndHour(instant, timeZone);
  return local && local.hour >= fromHour && local.hour < untilHour ? local.day : null;
}

/** The value for an <input type="datetime-local"> showing the instant in the zone. */
export function toLocalInput(instant: string | number | Date, timeZone: string): string {
  return formatLocal(instant, timeZone).replace(" ", "T");
}

/** What a typed wall time means in the zone; `message` is in words, for a field error. */
export type LocalInputReading =
  | { ok: true; instant: string }
  | { ok: false; problem: "not-a-date-time" | "unknown-zone" | "skipped"; message: string };

/**
 * "2026-11-03T14:20" (seconds optional) read as wall-clock time in the zone, by the
 * daylight-saving rule above: the earlier instant in a repeated hour, a refusal in
 * words in a skipped one.
 */
export function readLocalInput(local: string, timeZone: string): LocalInputReading {
  const m = /^(\d{4})-(\d{2})-(\d{2})T(\d{2}):(\d{2})(?::(\d{2}))?$/.exec(local.trim());
  const notDateTime = {
    ok: false,
    problem: "not-a-date-time",
    message: "Enter a date and time, such as 2026-11-03 14:20.",
  } as const;
  if (!m) return notDateTime;
  const wall: Wall = { year: +m[1], month: +m[2], day: +m[3], hour: +m[4], minute: +m[5], second: m[6] ? +m[6] : 0 };
  const target = wallMs(wall);
  const check = new Date(target);
  if (
    check.getUTCFullYear() !== wall.year ||
    check.getUTCMonth() !== wall.month - 1 ||
    check.getUTCDate() !== wall.day ||
    wall.hour > 23 ||
    wall.minute > 59 ||
    wall.second > 59
  ) {
    return notDateTime;
  }
  const before = tzOffset(timeZone, new Date(target - DAY));
  const after = tzOffset(timeZone, new Date(target + DAY));
  if (!Number.isFinite(before) || !Number.isFinite(after)) {
    return { ok: false, problem: "unknown-zone", message: `The site's time zone “${timeZone}” is not known.` };
  }

  // Every instant whose wall clock in the zone reads what was typed: the library's own
  // reading and the readings with the offsets either side of a change, each checked by
  // converting back. Two in a repeated hour, none in a skipped one.
  const candidates = [
    new TZDate(wall.year, wall.month - 1, wall.day, wall.hour, wall.minute, wall.second, timeZone).getTime(),
    target - before * MINUTE,
    target - after * MINUTE,
  ].filter((instant) => {
    const back = wallAt(instant, timeZone);
    return back !== null && wallMs(back) === target;
  });
  if (candidates.length > 0) return { ok: true, instant: new Date(Math.min(...candidates)).toISOString() };

  const shown = `${pad(wall.hour)}:${pad(wall.minute)} on ${m[1]}-${m[2]}-${m[3]}`;
  return { ok: false, problem: "skipped", message: skippedMessage(shown, target, before, after, timeZone) };
}

/** "01:30 on 2026-03-29 does not exist in Europe/London: clocks go forward at 01:00 (to 02:00); …" */
function skippedMessage(shown: string, target: number, before: number, after: number, timeZone: string): string {
  const advice = "enter the time as shown on the site's clocks.";
  if (after <= before) return `${shown} does not exist in ${timeZone}: the clocks skip it; ${advice}`;
  // The change lies between the instant the typed time would be under the later offset
  // (still the earlier offset then) and under the earlier offset (already the later one).
  let lo = target - after * MINUTE;
  let hi = target - before * MINUTE;
  while (hi - lo > MINUTE) {
    const mid = lo + Math.floor((hi - lo) / 2 / MINUTE) * MINUTE;
    if (tzOffset(timeZone, new Date(mid)) === after) hi = mid;
    else lo = mid;
  }
  const clock = (instant: number) => {
    const w = new Date(instant);
    return `${pad(w.getUTCHours())}:${pad(w.getUTCMinutes())}`;
  };
  return `${shown} does not exist in ${timeZone}: clocks go forward at ${clock(hi + before * MINUTE)} (to ${clock(hi + after * MINUTE)}); ${advice}`;
}

/**
 * "2026-11-03T14:20" read as wall-clock time in the zone → ISO instant (UTC), or null
 * when the text is not a date-time or names a time the site's clocks skipped (see the
 * rule above; `readLocalInput` gives the reason in words).
 */
export function localInputToInstant(local: string, timeZone: string): string | null {
  const reading = readLocalInput(local, timeZone);
  return reading.ok ? reading.instant : null;
}
