/**
 * What the browser and the server both know about coupon attachments: the kinds a file
 * may be filed as, and the shape of an attachment as screens show it. Pure: the
 * attachment components import it, the attachments model re-exports it.
 */

export const attachmentKinds = ["as_removed", "after_cleaning", "pit_close_up", "lab_sheet"] as const;
/** A thickness survey's files: its sheet (PDF or a photo of it), photos, and the instrument's CSV export. */
export const surveyAttachmentKinds = ["survey_sheet", "survey_photo", "instrument_export"] as const;
export type CouponAttachmentKind = (typeof attachmentKinds)[number];
export type SurveyAttachmentKind = (typeof surveyAttachmentKinds)[number];
export type AttachmentKind = CouponAttachmentKind | SurveyAttachmentKind;

/** Each kind as people say it. */
export const attachmentKindLabels: Record<AttachmentKind, string> = {
  as_removed: "As removed",
  after_cleaning: "After cleaning",
  pit_close_up: "Close-up of a pit",
  lab_sheet: "Lab sheet",
  survey_sheet: "Survey sheet",
  survey_photo: "Photo",
  instrument_export: "Instrument export (CSV)",
};

const kindWords = (kinds: readonly AttachmentKind[]) => {
  const words = kinds.map((k) => attachmentKindLabels[k].toLowerCase());
  return `${words.slice(0, -1).join(", ")} or ${words[words.length - 1]}`;
};
/** "as removed, after cleaning, close-up of a pit or lab sheet" */
export const attachmentKindWords = kindWords(attachmentKinds);
/** "survey sheet, photo or instrument export (csv)" */
export const surveyAttachmentKindWords = kindWords(surveyAttachmentKinds);

export type AttachmentView = {
  id: string;
  kind: AttachmentKind;
  contentType: string;
  byteSize: number;
  name: string;
  /** The original, through a short-lived presigned URL (302). */
  url: string;
  /** A small upright JPEG (302 to a presigned URL); null for PDFs and CSV exports. */
  thumbnailUrl: string | null;
  createdAt: string;
  uploadedBy: string;
  canRemove: boolean;
};
