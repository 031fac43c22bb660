import { data, type RouterContextProvider } from "react-router";
import { isDatabaseUnavailable } from "./db.server";
import { Invalid, Outcome, TooManyRequests, type FieldErrors } from "./outcome";
import { problem, requestIdOf } from "./problem.server";

/**
 * The one place where the models' typed outcomes become responses.
 *
 * - Page actions: `formAction(values, () => work)` returns `data({ errors, values }, 400)`
 *   for Invalid and `409` for Conflict (the form keeps what was typed) and throws 403/404
 *   to the route's error boundary.
 * - Page loaders: `pageLoad(() => work)` throws every outcome to the error boundary.
 * - /api/v1: `apiCall(args, () => work)` answers problem+json with the request id.
 *
 * A database that cannot be reached (see `isDatabaseUnavailable`) is a 503 with
 * Retry-After everywhere: these three wrappers, the session middleware
 * (`databaseOutage` there) and, for loaders that use no wrapper, the status fix-up of
 * `databaseOutage` after `handleError` in entry.server.tsx has noted the outage.
 */

/** What a form sent, as text (files are read separately). */
export type FormValues = Record<string, string>;

export type FormFailure = {
  errors: FieldErrors;
  values: FormValues;
  /** Which of the page's forms failed (a hidden `intent` field). */
  intent: string | null;
  /** The record's `id` field when the form edits one of several rows. */
  id: string | null;
  details?: Record<string, unknown>;
  /** Set when the record changed under the user (409): the page says so and offers a reload. */
  conflict?: true;
};

type Args = { request: Request; context: Readonly<RouterContextProvider> };

/** The text fields of a form body. */
export async function readForm(request: Request): Promise<FormValues> {
  return (await readFormParts(request)).values;
}

/**
 * A form body in parts: each text field's last value, every value of repeated fields
 * (lists such as several weighings), and the chosen (non-empty) files.
 */
export async function readFormParts(
  request: Request,
): Promise<{ values: FormValues; lists: Record<string, string[]>; files: Record<string, File> }> {
  const type = (request.headers.get("Content-Type") ?? "").toLowerCase();
  if (!/^(application\/x-www-form-urlencoded|multipart\/form-data)\b/.test(type))
    throw data("This page takes a form (URL-encoded or multipart), not another kind of body.", { status: 415 });
  let form: FormData;
  try {
    form = await request.formData();
  } catch {
    throw data("The form arrived incomplete or garbled. Reload the page and send it again.", { status: 400 });
  }
  const values: FormValues = {};
  const lists: Record<string, string[]> = {};
  const files: Record<string, File> = {};
  for (const [key, value] of form) {
    if (typeof value === "string") {
      values[key] = value;
      (lists[key] ??= []).push(value);
    } else if (value.size > 0) files[key] = value;
  }
  return { values, lists, files };
}

/** The form's `intent`, one of the listed ones, or a 400 page error. */
export function intentOf<I extends string>(values: FormValues, intents: readonly I[]): I {
  const intent = values.intent as I;
  if (!intents.includes(intent)) throw data("This form does not do that.", { status: 400 });
  return intent;
}

function failure(values: FormValues, errors: FieldErrors, details?: Record<string, unknown>): FormFailure {
  return { errors, values, intent: values.intent ?? null, id: values.id ?? null, ...(details ? { details } : {}) };
}

/** A form failure the route found itself (before any model ran). */
export function invalidForm(values: FormValues, errors: FieldErrors, details?: Record<string, unknown>) {
  return data(failure(values, errors, details), { status: 400 });
}

/** Seconds a client is asked to wait before trying again while the database is out. */
export const OUTAGE_RETRY_AFTER_SECONDS = 10;

const outageWords =
  "Wallcast cannot reach its database just now. Try again in a minute; if you were saving something, look whether it is there before saving it again.";

function noteOutageInLog(error: unknown) {
  console.warn(`${new Date().toISOString()} database unavailable: ${(error as Error).message.split("\n")[0]}`);
}

/** The page answer to a database outage: the error boundary shows the words, with status 503. */
export function outagePageError(): ReturnType<typeof data<string>> {
  return data(outageWords, { status: 503, headers: { "Retry-After": String(OUTAGE_RETRY_AFTER_SECONDS) } });
}

/** The /api/v1 answer to a database outage. */
export function outageProblem(requestId: string): Response {
  return problem(503, outageWords, {
    requestId,
    headers: { "Retry-After": String(OUTAGE_RETRY_AFTER_SECONDS) },
  });
}

/** Requests whose handling met a database outage outside the wrappers (noted by handleError). */
const outages = new WeakSet<object>();

export function noteOutage(context: object, error: unknown): void {
  outages.add(context);
  noteOutageInLog(error);
}

export function metOutage(context: object): boolean {
  return outages.has(context);
}

export async function formAction<T>(values: FormValues, work: () => Promise<T>) {
  try {
    return await work();
  } catch (error) {
    if (isDatabaseUnavailable(error)) {
      noteOutageInLog(error);
      throw outagePageError();
    }
    if (error instanceof Invalid) return data(failure(values, error.fieldErrors, error.details), { status: 400 });
    if (error instanceof Outcome && error.status === 409)
      return data({ ...failure(values, { form: error.message }), conflict: true as const }, { status: 409 });
    if (error instanceof Outcome) throw data(error.message, { status: error.status, headers: headersOf(error) });
    throw error;
  }
}

/** The headers an outcome's response carries (Retry-After over a rate limit). */
export function headersOf(error: Outcome): Record<string, string> {
  return error instanceof TooManyRequests ? { "Retry-After": String(error.retryAfterSeconds) } : {};
}

export async function pageLoad<T>(work: () => Promise<T>): Promise<T> {
  try {
    return await work();
  } catch (error) {
    if (isDatabaseUnavailable(error)) {
      noteOutageInLog(error);
      throw outagePageError();
    }
    if (error instanceof Outcome) throw data(error.message, { status: error.status, headers: headersOf(error) });
    throw error;
  }
}

/**
 * Downloads and other resource routes a link opens: an outcome of the check becomes a
 * short plain-text answer the browser shows (with Retry-After over a rate limit); null
 * when the check passed.
 */
export async function resourceCheck(work: () => Promise<void>): Promise<Response | null> {
  try {
    await work();
    return null;
  } catch (error) {
    if (!(error instanceof Outcome)) throw error;
    return new Response(error.message, {
      status: error.status,
      headers: { "Content-Type": "text/plain; charset=utf-8", "Cache-Control": "no-store", ...headersOf(error) },
    });
  }
}

export async function apiCall(args: Args, work: () => Promise<Response>): Promise<Response> {
  try {
    return await work();
  } catch (error) {
    if (isDatabaseUnavailable(error)) {
      noteOutageInLog(error);
      return outageProblem(requestIdOf(args.context));
    }
    if (error instanceof Outcome) {
      const extra: Record<string, unknown> = {};
      if (error instanceof Invalid) extra.errors = error.fieldErrors;
      if (error.status === 409 && "current" in error && error.current) extra.current = error.current;
      return problem(error.status, error.message, {
        requestId: requestIdOf(args.context),
        extra,
        headers: headersOf(error),
      });
    }
    throw error;
  }
}
