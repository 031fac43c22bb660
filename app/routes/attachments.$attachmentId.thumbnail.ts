import { attachmentForViewing } from "~/models/attachments.server";
import { methodNotAllowed } from "~/services/api.server";
import { db } from "~/services/db.server";
import { requireUser } from "~/services/guards.server";
import { contentDisposition, notShared, presignedGet, presignedRedirect } from "~/services/uploads.server";
import type { Route } from "./+types/attachments.$attachmentId.thumbnail";

/**
 * GET /attachments/:id/thumbnail → 302 to a presigned URL of the upright, metadata-free
 * JPEG thumbnail (about five minutes), for a user allowed to see the coupon; 404 for
 * anyone else, for malformed ids, and for PDFs (which have no thumbnail).
 */
export async function loader(args: Route.LoaderArgs) {
  const attachment = await attachmentForViewing(db(), requireUser(args), args.params.attachmentId);
  if (!attachment) return notShared();
  if (!attachment.thumbnailKey) return notShared("This lab sheet is a PDF and has no thumbnail; open the file itself.");
  const stem = attachment.name.replace(/\.[^.]*$/, "") || "photo";
  const url = await presignedGet(attachment.thumbnailKey, {
    contentType: "image/jpeg",
    disposition: contentDisposition("inline", `${stem} (thumbnail).jpg`),
  });
  return presignedRedirect(url);
}

export function action(args: Route.ActionArgs) {
  return methodNotAllowed(args, "GET");
}
