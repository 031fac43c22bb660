import type { AttachmentView } from "~/services/attachment-kinds";
import { surveyAttachmentKinds } from "~/services/attachment-kinds";
import { AttachmentDropzone, type DropzoneSetup } from "./attachment-dropzone";

/**
 * A thickness survey's files: the survey sheet (PDF, or a photo of it), photos of the
 * CMLs, and the instrument's CSV export, through the same drop zone as a coupon's files.
 */
export function SurveyAttachments({
  submissionId,
  attachments,
  locked,
}: {
  submissionId: string;
  attachments: AttachmentView[];
  locked: boolean;
}) {
  const setup: DropzoneSetup = {
    endpoint: `/surveys/${submissionId}/attachments`,
    kinds: surveyAttachmentKinds,
    sheetKind: "survey_sheet",
    csvKind: "instrument_export",
    accept: {
      "image/jpeg": [".jpg", ".jpeg"],
      "image/png": [".png"],
      "image/webp": [".webp"],
      "application/pdf": [".pdf"],
      "text/csv": [".csv"],
    },
    words: {
      drop: "Drop the survey sheet, photos or the instrument's export here, or click to choose files",
      hint: "The survey sheet as PDF, photos as JPEG, PNG or WebP (up to 20 MB each), the instrument's export as CSV text (up to 5 MB).",
      empty:
        "Nothing attached yet. Add the signed survey sheet and the instrument's export, and photos of any CML that looks unusual, so the owner's engineer can check the readings.",
      locked: "This survey has been sent to the owner, so its files can no longer change.",
      button:
        "Add the survey sheet, photos or the instrument's export: drop files here, or press Enter to choose files",
      pdf: "A PDF is attached as the survey sheet.",
    },
  };
  return <AttachmentDropzone setup={setup} attachments={attachments} locked={locked} />;
}
