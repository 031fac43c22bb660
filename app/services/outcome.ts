import type { z } from "zod";

/**
 * The one outcome contract of the models. A model function either returns its value
 * or throws one of these four typed errors; `app/services/respond.server.ts` turns them
 * into responses in one place (a page's 400/403/404/409, or problem+json under /api/v1).
 * Pure: the browser may import the types (field errors) too.
 */

/** Field name → what to correct, in words. `form` is the whole form. */
export type FieldErrors = Record<string, string>;

export abstract class Outcome extends Error {
  abstract readonly status: 400 | 403 | 404 | 409 | 413 | 415 | 429 | 503;
}

/**
 * A refused upload or body: too large (413), of a type we do not take (415), or the
 * object store unreachable (503, try again) — with the words for the user.
 */
export class Refused extends Outcome {
  constructor(
    readonly status: 400 | 404 | 409 | 413 | 415 | 503,
    message: string,
  ) {
    super(message);
    this.name = "Refused";
  }
}

/**
 * Over a rate limit: a 429 with `Retry-After` (whole seconds, at least 1) and the words
 * that say when to try again.
 */
export class TooManyRequests extends Outcome {
  readonly status = 429 as const;
  readonly retryAfterSeconds: number;
  constructor(what: string, retryAfterSeconds: number) {
    const seconds = Math.max(1, Math.ceil(retryAfterSeconds));
    super(`${what} Try again in ${waitInWords(seconds)}.`);
    this.retryAfterSeconds = seconds;
    this.name = "TooManyRequests";
  }
}

/** "40 seconds", "1 minute", "3 minutes" (rounded up past a minute), "2 hours". */
export function waitInWords(seconds: number): string {
  const plural = (n: number, unit: string) => `${n} ${unit}${n === 1 ? "" : "s"}`;
  if (seconds < 60) return plural(seconds, "second");
  if (seconds < 3600) return plural(Math.ceil(seconds / 60), "minute");
  return plural(Math.ceil(seconds / 3600), "hour");
}

/** The record does not exist for this tenant (or belongs to another one): a 404, never a 403. */
export class NotFoundInTenant extends Outcome {
  readonly status = 404 as const;
  constructor(what = "record") {
    super(`There is no such ${what} here, or it is not shared with your organisation.`);
    this.name = "NotFoundInTenant";
  }
}

/** The acting user may see the record but their role or contract does not allow this. */
export class Forbidden extends Outcome {
  readonly status = 403 as const;
  constructor(message: string) {
    super(message);
    this.name = "Forbidden";
  }
}

/** The record changed under the user (a stale version, a state that no longer allows it). */
export class Conflict extends Outcome {
  readonly status = 409 as const;
  constructor(
    message: string,
    readonly current?: Record<string, unknown>,
  ) {
    super(message);
    this.name = "Conflict";
  }
}

/** Input the user must correct: a message per field, plus optional details (row problems, notes). */
export class Invalid extends Outcome {
  readonly status = 400 as const;
  constructor(
    readonly fieldErrors: FieldErrors,
    readonly details?: Record<string, unknown>,
  ) {
    super(Object.values(fieldErrors)[0] ?? "The input has problems.");
    this.name = "Invalid";
  }
}

/**
 * A refused file (a CSV import): one form-level message, and every row problem in the
 * details for the page to list by line and column. Nothing of the file was written.
 */
export function refusedFile<D extends { problems: unknown[] }>(details: D): Invalid {
  return new Invalid({ file: `The file was not imported: ${details.problems.length} problem(s).` }, details);
}

/** Every problem of a zod error, the first per field (a nested path names its first key). */
export function fieldErrorsOf(error: z.ZodError): FieldErrors {
  const errors: FieldErrors = {};
  for (const issue of error.issues) {
    const key = issue.path.length > 0 ? String(issue.path[0]) : "form";
    errors[key] ??= issue.message;
  }
  return errors;
}

/** Parses with the schema or throws Invalid naming every field at once. */
export function parseOrThrow<S extends z.ZodType>(schema: S, input: unknown): z.output<S> {
  const parsed = schema.safeParse(input);
  if (!parsed.success) throw new Invalid(fieldErrorsOf(parsed.error));
  return parsed.data;
}

/** Throws Invalid when there is at least one field error. */
export function throwIfInvalid(errors: FieldErrors, details?: Record<string, unknown>): void {
  if (Object.keys(errors).length > 0) throw new Invalid(errors, details);
}
