import { attachmentForViewing } from "~/models/attachments.server";
import { methodNotAllowed } from "~/services/api.server";
import { db } from "~/services/db.server";
import { requireUser } from "~/services/guards.server";
import {
  contentDisposition,
  downloadName,
  notShared,
  presignedGet,
  presignedRedirect,
} from "~/services/uploads.server";
import type { Route } from "./+types/attachments.$attachmentId";

/**
 * GET /attachments/:id → 302 to a presigned URL of the original (about five minutes),
 * for a user allowed to see the coupon or the survey; 404 for anyone else and for malformed ids.
 * Photos and PDF lab sheets open in the browser (inline), saved under the original name
 * with the extension their bytes call for. The URL points at the object store's origin,
 * so nothing in a file runs with the app's origin.
 */
export async function loader(args: Route.LoaderArgs) {
  const attachment = await attachmentForViewing(db(), requireUser(args), args.params.attachmentId);
  if (!attachment) return notShared();
  const ext =
    attachment.contentType === "application/pdf"
      ? "pdf"
      : attachment.contentType === "text/csv"
        ? "csv"
        : attachment.contentType === "image/jpeg"
          ? "jpg"
          : attachment.contentType.slice(6);
  // An instrument's CSV export is saved, not opened in the browser.
  const url = await presignedGet(attachment.objectKey, {
    contentType: attachment.contentType,
    disposition: contentDisposition(
      attachment.contentType === "text/csv" ? "attachment" : "inline",
      downloadName(attachment.name, ext),
    ),
  });
  return presignedRedirect(url);
}

export function action(args: Route.ActionArgs) {
  return methodNotAllowed(args, "GET");
}
