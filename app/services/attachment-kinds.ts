/**
 * What the browser and the server both know about coupon attachments: the kinds a file
 * may be filed as, and the shape of an attachment as screens show it. Pure: the
 * attachment components import it, the attachments model re-exports it.
 */

export const attachmentKinds = ["as_removed", "after_cleaning", "pit_close_up", "lab_sheet"] as const;
export type AttachmentKind = (typeof attachmentKinds)[number];

/** Each kind as people say it. */
export const attachmentKindLabels: Record<AttachmentKind, string> = {
  as_removed: "As removed",
  after_cleaning: "After cleaning",
  pit_close_up: "Close-up of a pit",
  lab_sheet: "Lab sheet",
};

/** "as removed, after cleaning, close-up of a pit or lab sheet" */
export const attachmentKindWords = (() => {
  const words = attachmentKinds.map((k) => attachmentKindLabels[k].toLowerCase());
  return `${words.slice(0, -1).join(", ")} or ${words[words.length - 1]}`;
})();

export type AttachmentView = {
  id: string;
  kind: AttachmentKind;
  contentType: string;
  byteSize: number;
  name: string;
  /** The original, through a short-lived presigned URL (302). */
  url: string;
  /** A small upright JPEG (302 to a presigned URL); null for PDFs. */
  thumbnailUrl: string | null;
  createdAt: string;
  uploadedBy: string;
  canRemove: boolean;
};
