import { textProblem } from "./form-fields";
/**
 * What an engineer must answer before approving, known to both the review page and the
 * server: every warning-level quality flag of every coupon or thickness reading, and the
 * review's own checks (a coupon without a photo when the owner asks for photos). Each
 * warning needs a short reason; note-level flags need none. Pure, so the page shows
 * exactly what the server will ask for.
 */

export type ReviewFlag = {
  /** Stable within a submission: the result (or reading) and the flag's code. */
  key: string;
  resultId: string;
  /** What the flag is on, as the audit trail names it: the coupon serial or the CML tag. */
  label: string;
  /** The same in a sentence: "coupon QCS-4107", "CML 12-CML-004". */
  subject: string;
  code: string;
  severity: "warning" | "info";
  message: string;
};

export type ReviewedResult = {
  id: string;
  couponSerial: string;
  computed: { flags: ReadonlyArray<{ code: string; severity: "warning" | "info"; message: string }> };
};

/** A thickness reading as the review sees it: its CML and the flags stored when the survey was submitted. */
export type ReviewedReading = {
  id: string;
  cmlTag: string;
  flags: ReadonlyArray<{ code: string; severity: "warning" | "info"; message: string }>;
};

export type AttachmentSummary = { contentType: string };

export const ACK_REASON_MIN = 3;
export const ACK_REASON_MAX = 500;

/** The form field that carries the reason for one acknowledged warning. */
export const ackFieldName = (key: string) => `ack.${key}`;

/** Flags the review itself raises for one coupon (not stored with the result: they depend on today's files). */
export function reviewFlagsFor(
  result: ReviewedResult,
  attachments: readonly AttachmentSummary[],
  photosRequired: boolean,
): ReviewFlag[] {
  const photos = attachments.filter((a) => a.contentType.startsWith("image/")).length;
  if (!photosRequired || photos > 0) return [];
  return [
    {
      key: `${result.id}.no-photo`,
      resultId: result.id,
      label: result.couponSerial,
      subject: `coupon ${result.couponSerial}`,
      code: "no-photo",
      severity: "warning",
      message: `No photo of coupon ${result.couponSerial} is attached, and your organisation's settings ask for a photo of every coupon.`,
    },
  ];
}

/** Every flag of one coupon as the review shows it: the stored quality flags, then the review's own. */
export function flagsOfResult(
  result: ReviewedResult,
  attachments: readonly AttachmentSummary[],
  photosRequired: boolean,
): ReviewFlag[] {
  const seen = new Set<string>();
  const stored = result.computed.flags.flatMap((f) => {
    const key = `${result.id}.${f.code}`;
    if (seen.has(key)) return [];
    seen.add(key);
    return [{ key, resultId: result.id, label: result.couponSerial, subject: `coupon ${result.couponSerial}`, ...f }];
  });
  return [...stored, ...reviewFlagsFor(result, attachments, photosRequired)];
}

/** Every flag of one thickness reading: those stored with it when the survey was submitted. */
export function flagsOfReading(reading: ReviewedReading): ReviewFlag[] {
  const seen = new Set<string>();
  return reading.flags.flatMap((f) => {
    const key = `${reading.id}.${f.code}`;
    if (seen.has(key)) return [];
    seen.add(key);
    return [{ key, resultId: reading.id, label: reading.cmlTag, subject: `CML ${reading.cmlTag}`, ...f }];
  });
}

/** What is under review: a coupon submission's results with their files, or a survey's readings. */
export type UnderReview =
  | {
      kind: "coupon";
      results: readonly ReviewedResult[];
      attachmentsOf: (resultId: string) => readonly AttachmentSummary[];
      photosRequired: boolean;
    }
  | { kind: "thickness"; readings: readonly ReviewedReading[] };

/** The warnings an approval must acknowledge, coupon by coupon or reading by reading. */
export function warningsToAcknowledge(review: UnderReview): ReviewFlag[] {
  const flags =
    review.kind === "coupon"
      ? review.results.flatMap((r) => flagsOfResult(r, review.attachmentsOf(r.id), review.photosRequired))
      : review.readings.flatMap(flagsOfReading);
  return flags.filter((f) => f.severity === "warning");
}

export type Acknowledgement = Pick<ReviewFlag, "key" | "resultId" | "label" | "subject" | "code" | "message"> & {
  reason: string;
};

/**
 * Matches the reasons sent with an approval to the warnings: every warning needs one
 * (3–500 characters). Returns the acknowledgements, or the field errors of every warning
 * left without a reason — all at once.
 */
export function readAcknowledgements(
  warnings: readonly ReviewFlag[],
  values: Readonly<Record<string, string | undefined>>,
): { ok: true; acknowledgements: Acknowledgement[] } | { ok: false; errors: Record<string, string> } {
  const errors: Record<string, string> = {};
  const acknowledgements: Acknowledgement[] = [];
  for (const w of warnings) {
    const field = ackFieldName(w.key);
    const typed = values[field] ?? "";
    const reason = typed.replace(/\s+/g, " ").trim();
    // Checked on what was typed, before spaces are joined: a reason is one line of plain text.
    const problem = textProblem(typed, "the reason", false);
    if (problem) errors[field] = problem;
    else if (reason.length < ACK_REASON_MIN)
      errors[field] = `Say why this warning on ${w.subject} does not stop approval.`;
    else if (reason.length > ACK_REASON_MAX) errors[field] = `Keep the reason under ${ACK_REASON_MAX} characters.`;
    else
      acknowledgements.push({
        key: w.key,
        resultId: w.resultId,
        label: w.label,
        subject: w.subject,
        code: w.code,
        message: w.message,
        reason,
      });
  }
  return Object.keys(errors).length ? { ok: false, errors } : { ok: true, acknowledgements };
}
