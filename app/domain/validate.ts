/**
 * Shared input checks for the calculation library.
 *
 * Standards: none by itself; it enforces the rule that runs through every
 * function of the library (ASTM G1, G46, G102, API 570 calculations alike):
 * an input outside its physical range is a RangeError whose message starts
 * with the property name and states the allowed range, e.g.
 * `areaCm2 must be > 0 (got -1)`. Nothing returns NaN or a negative rate
 * silently.
 *
 * The checks are small functions on purpose: V8 inlines them on the hot
 * paths (a fleet recompute calls the rate functions hundreds of thousands of
 * times), and the message is only built when a check fails.
 */

/** Renders a rejected value for an error message without throwing itself. */
function showValue(value: unknown): string {
  if (typeof value === "number") return Object.is(value, -0) ? "0" : String(value);
  if (typeof value === "string") return JSON.stringify(value);
  if (value === null) return "null";
  if (value === undefined) return "undefined";
  if (Array.isArray(value)) return "an array";
  return `a ${typeof value}`;
}

/**
 * The error every check throws: a RangeError (so `instanceof RangeError` keeps working)
 * that also carries the exact name of the offending input, e.g. "densityGcm3" or
 * "readings[2].date", so callers map it to a form field without parsing the message.
 */
export class FieldRangeError extends RangeError {
  readonly field: string;
  constructor(field: string, message: string) {
    super(message);
    this.name = "RangeError";
    this.field = field;
  }
}

/** Builds the error every check throws: `<name> must be <rule> (got <value>)`. */
export function rangeError(name: string, rule: string, value: unknown): FieldRangeError {
  return new FieldRangeError(name, `${name} must be ${rule} (got ${showValue(value)})`);
}

/** The wording when the value is not a usable number at all (NaN, ±Infinity, a string…). */
function finiteRule(rule: string, value: unknown): string {
  return typeof value === "number" && Number.isFinite(value) ? rule : `a finite number ${rule}`;
}

/** A finite number > 0 (areas, exposure times, densities). */
export function requirePositive(name: string, value: unknown): number {
  if (typeof value !== "number" || !(value > 0) || value === Infinity) {
    throw rangeError(name, finiteRule("> 0", value), value);
  }
  return value;
}

/** A finite number ≥ 0 (mass loss, pit depth, a rate that may be zero). */
export function requireNonNegative(name: string, value: unknown): number {
  if (typeof value !== "number" || !(value >= 0) || value === Infinity) {
    throw rangeError(name, finiteRule(">= 0", value), value);
  }
  return value;
}

/** Any finite number (signed quantities such as a measured mass change). */
export function requireFinite(name: string, value: unknown): number {
  if (typeof value !== "number" || !Number.isFinite(value)) {
    throw rangeError(name, "a finite number", value);
  }
  return value;
}

/** A number > 0 that may also be +Infinity (a Tafel slope of a diffusion-limited reaction). */
export function requirePositiveOrInfinity(name: string, value: unknown): number {
  if (typeof value !== "number" || !(value > 0)) {
    throw rangeError(name, "> 0 (Infinity allowed)", value);
  }
  return value;
}

/** A finite number in (min, max] — e.g. a joint efficiency or utilisation factor in (0, 1]. */
export function requireInHalfOpen(name: string, value: unknown, min: number, max: number): number {
  if (typeof value !== "number" || !(value > min) || !(value <= max)) {
    throw rangeError(name, `> ${min} and <= ${max}`, value);
  }
  return value;
}

/** A finite number in [min, max]. */
export function requireInClosed(name: string, value: unknown, min: number, max: number): number {
  if (typeof value !== "number" || !(value >= min) || !(value <= max)) {
    throw rangeError(name, `>= ${min} and <= ${max}`, value);
  }
  return value;
}

/** An integer in [min, max]. */
export function requireInteger(name: string, value: unknown, min: number, max: number): number {
  if (typeof value !== "number" || !Number.isInteger(value) || value < min || value > max) {
    throw rangeError(name, `an integer from ${min} to ${max}`, value);
  }
  return value;
}

/** The argument itself must be a plain object (the functions take named fields, never positions). */
export function requireObject(name: string, value: unknown): void {
  if (value === null || typeof value !== "object" || Array.isArray(value)) {
    throw rangeError(name, "an object", value);
  }
}

/** One of a fixed list of literal values. */
export function requireOneOf<T>(name: string, value: unknown, allowed: readonly T[]): T {
  for (let i = 0; i < allowed.length; i++) if (allowed[i] === value) return value as T;
  throw rangeError(name, `one of ${allowed.map((a) => showValue(a)).join(", ")}`, value);
}
