/**
 * Instants shown and entered in a site's own time zone, in ISO form.
 * Pure (Intl only), so forms and the server agree.
 */
const formatters = new Map<string, Intl.DateTimeFormat>();
function parts(instant: number, timeZone: string) {
  let f = formatters.get(timeZone);
  if (!f) {
    f = new Intl.DateTimeFormat("en-CA", {
      timeZone,
      hourCycle: "h23",
      year: "numeric",
      month: "2-digit",
      day: "2-digit",
      hour: "2-digit",
      minute: "2-digit",
      second: "2-digit",
    });
    formatters.set(timeZone, f);
  }
  const out: Record<string, string> = {};
  for (const p of f.formatToParts(new Date(instant))) out[p.type] = p.value;
  return out;
}

/** "2026-11-03 14:20" in the zone. */
export function formatLocal(instant: string | number | Date, timeZone: string): string {
  const ms = typeof instant === "number" ? instant : new Date(instant).getTime();
  if (!Number.isFinite(ms)) return "—";
  const p = parts(ms, timeZone);
  return `${p.year}-${p.month}-${p.day} ${p.hour}:${p.minute}`;
}

/** "2026-11-03" in the zone. */
export function formatLocalDate(instant: string | number | Date, timeZone: string): string {
  return formatLocal(instant, timeZone).slice(0, 10);
}

/** The value for an <input type="datetime-local"> showing the instant in the zone. */
export function toLocalInput(instant: string | number | Date, timeZone: string): string {
  return formatLocal(instant, timeZone).replace(" ", "T");
}

function offsetMs(instant: number, timeZone: string): number {
  const p = parts(instant, timeZone);
  const asUtc = Date.UTC(+p.year, +p.month - 1, +p.day, +p.hour, +p.minute, +p.second);
  return asUtc - Math.floor(instant / 1000) * 1000;
}

/**
 * "2026-11-03T14:20" read as wall-clock time in the zone → ISO instant (UTC), or null
 * when the text is not a date-time. In a daylight-saving gap the later offset wins.
 */
export function localInputToInstant(local: string, timeZone: string): string | null {
  const m = /^(\d{4})-(\d{2})-(\d{2})T(\d{2}):(\d{2})(?::(\d{2}))?$/.exec(local.trim());
  if (!m) return null;
  const [, y, mo, d, h, mi, s] = m;
  const wall = Date.UTC(+y, +mo - 1, +d, +h, +mi, s ? +s : 0);
  const check = new Date(wall);
  if (check.getUTCMonth() !== +mo - 1 || check.getUTCDate() !== +d) return null;
  let guess = wall - offsetMs(wall, timeZone);
  guess = wall - offsetMs(guess, timeZone);
  return new Date(guess).toISOString();
}
