/**
 * What an engineer must answer before approving, known to both the review page and the
 * server: every warning-level quality flag of every coupon, and the review's own checks
 * (a coupon without a photo when the owner asks for photos). Each warning needs a short
 * reason; note-level flags need none. Pure, so the page shows exactly what the server
 * will ask for.
 */

export type ReviewFlag = {
  /** Stable within a submission: the result and the flag's code. */
  key: string;
  resultId: string;
  coupon: string;
  code: string;
  severity: "warning" | "info";
  message: string;
};

export type ReviewedResult = {
  id: string;
  couponSerial: string;
  computed: { flags: ReadonlyArray<{ code: string; severity: "warning" | "info"; message: string }> };
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
      coupon: result.couponSerial,
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
    return [{ key, resultId: result.id, coupon: result.couponSerial, ...f }];
  });
  return [...stored, ...reviewFlagsFor(result, attachments, photosRequired)];
}

/** The warnings an approval must acknowledge, coupon by coupon. */
export function warningsToAcknowledge(
  results: readonly ReviewedResult[],
  attachmentsOf: (resultId: string) => readonly AttachmentSummary[],
  photosRequired: boolean,
): ReviewFlag[] {
  return results.flatMap((r) =>
    flagsOfResult(r, attachmentsOf(r.id), photosRequired).filter((f) => f.severity === "warning"),
  );
}

export type Acknowledgement = Pick<ReviewFlag, "key" | "resultId" | "coupon" | "code" | "message"> & {
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
    const reason = (values[field] ?? "").replace(/\s+/g, " ").trim();
    if (reason.length < ACK_REASON_MIN)
      errors[field] = `Say why this warning on coupon ${w.coupon} does not stop approval.`;
    else if (reason.length > ACK_REASON_MAX) errors[field] = `Keep the reason under ${ACK_REASON_MAX} characters.`;
    else
      acknowledgements.push({
        key: w.key,
        resultId: w.resultId,
        coupon: w.coupon,
        code: w.code,
        message: w.message,
        reason,
      });
  }
  return Object.keys(errors).length ? { ok: false, errors } : { ok: true, acknowledgements };
}
