/**
 * How large a request body may be, by path and method: the one table the Express entry
 * (server.ts) enforces in front of React Router, from Content-Length before reading and by
 * counting while the body streams (chunked or not). The first matching row wins; the last
 * row matches everything, so no route goes without a limit. A new route with a larger need
 * gets its own row here (the LIMS sample ingest is listed before it exists).
 *
 * Pure: no Node or app imports, so server.ts, the upload reader and tests share it.
 */

const KiB = 1024;
const MiB = 1024 * KiB;

/** 20 MB (binary megabytes, as file browsers count) per attachment; the database allows 20971520 bytes. */
export const MAX_FILE_BYTES = 20 * MiB;
/** Room for a multipart envelope (boundaries, part headers, the other fields). */
export const ENVELOPE_BYTES = 64 * KiB;
/** The stated limit of a CSV import file (lab results, coupon stock, circuit design data and CMLs). */
export const CSV_IMPORT_BYTES = 2 * MiB;

/** How the refusal is answered: problem+json (API and upload clients) or the app's error page. */
export type RefusalAnswer = "problem" | "page";

export type BodyLimit = {
  /** What the row is for, in words (appears in logs and tests). */
  name: string;
  /** Methods the row applies to; absent: every method. */
  methods?: readonly string[];
  /**
   * The path (no query string), matched without regard to case as React Router matches
   * routes; `.data` is React Router's suffix for in-app form posts.
   */
  path: RegExp;
  bytes: number;
  answer: RefusalAnswer;
  /** The sentence the user reads when the body is refused. */
  message: string;
};

const noBody = "A request that only reads (GET or HEAD) carries no body; this one sent one, so it was refused.";

export const bodyLimits: readonly BodyLimit[] = [
  { name: "API read", methods: ["GET", "HEAD"], path: /^\/api\//i, bytes: 0, answer: "problem", message: noBody },
  { name: "page read", methods: ["GET", "HEAD"], path: /^/, bytes: 0, answer: "page", message: noBody },
  {
    name: "LIMS sample ingest",
    methods: ["POST", "PUT"],
    path: /^\/api\/v1\/lims\/samples\/?$/i,
    bytes: 8 * MiB,
    answer: "problem",
    message: "The body is larger than 8 MB, the limit for one LIMS sample batch; send the samples in several batches.",
  },
  {
    name: "JSON API",
    path: /^\/api\//i,
    bytes: 1 * MiB,
    answer: "problem",
    message: "The body is larger than 1 MB, the limit for a JSON request; send less in one request.",
  },
  {
    name: "attachment upload",
    methods: ["POST"],
    path: /^\/(lab|surveys)\/[^/]+\/attachments\/?$/i,
    bytes: MAX_FILE_BYTES + ENVELOPE_BYTES,
    answer: "problem",
    message:
      "The upload is larger than 20 MB; the limit is 20 MB per file. Save the photo at a smaller size (most phones and cameras have a setting), or scan the lab sheet at a lower resolution.",
  },
  {
    name: "CSV import",
    methods: ["POST"],
    path: /^\/(lab-import|setup\/coupons|setup\/sites\/[^/]+\/import|surveys\/[^/]+\/import)(\.data)?\/?$/i,
    bytes: CSV_IMPORT_BYTES + ENVELOPE_BYTES,
    answer: "page",
    message: "The file is larger than 2 MB, the limit for one import; split it into several imports.",
  },
  {
    name: "form",
    path: /^/,
    bytes: 1 * MiB,
    answer: "page",
    message:
      "The form sent more than 1 MB, which no form of Wallcast needs, so it was refused and nothing was saved. Go back, check what was pasted into the form, and send it again.",
  },
];

/** The row that applies to a request (always one: the last row matches everything). */
export function bodyLimitFor(method: string, pathname: string): BodyLimit {
  const m = method.toUpperCase();
  const row = bodyLimits.find((r) => (!r.methods || r.methods.includes(m)) && r.path.test(pathname));
  if (!row) throw new Error("the body limits table has no catch-all row");
  return row;
}

/** A refused body, as server.ts hands it to the app (root middleware answers it). */
export type BodyRefusal = { status: 413; answer: RefusalAnswer; message: string };
