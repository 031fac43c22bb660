import { z } from "zod";
import { attachmentKinds, listAttachments, removeAttachment, uploadAttachment } from "~/models/attachments.server";
import { exposureForLab } from "~/models/lab-results.server";
import { attachmentKindWords } from "~/services/attachment-kinds";
import { Forbidden } from "~/services/outcome";
import { apiProblem, json, methodNotAllowed, requireApiUser } from "~/services/api.server";
import { can } from "~/services/permissions";
import { apiCall } from "~/services/respond.server";
import { db } from "~/services/db.server";
import { isUuid } from "~/services/guards.server";
import { requestIdOf } from "~/services/problem.server";
import { consumeLimit } from "~/services/rate-limit.server";
import { readMultipart } from "~/services/uploads.server";
import type { Route } from "./+types/lab.$exposureId.attachments";

/**
 * Photos and lab sheets of a removed coupon (session cookie; problem+json errors).
 *
 *   GET                         → 200 { attachments: [...] }
 *   POST multipart file, kind   → 201 { id, kind, contentType, byteSize, name, thumbnailUrl, url, … }
 *                                 or 400 / 403 / 404 / 409 / 413 / 415 / 503
 *   DELETE ?id=<attachmentId>   → 204, or 403 / 404 / 409
 */

const uploadFields = z.object({
  kind: z.enum(attachmentKinds, { error: `Choose what the file shows: ${attachmentKindWords}.` }),
});

const missing = "There is no removed coupon at this address, or it is not shared with your organisation.";

export async function loader(args: Route.LoaderArgs) {
  const user = requireApiUser(args);
  const exposureId = args.params.exposureId;
  if (!isUuid(exposureId)) return apiProblem(args, 404, missing);
  return apiCall(args, async () => {
    const exposure = await exposureForLab(db(), user, exposureId.toLowerCase());
    return json({ attachments: await listAttachments(db(), user, exposure) });
  });
}

export async function action(args: Route.ActionArgs) {
  const user = requireApiUser(args);
  const method = args.request.method;
  if (method !== "POST" && method !== "DELETE") return methodNotAllowed(args, "GET, POST, DELETE");
  const exposureId = args.params.exposureId;
  if (!isUuid(exposureId)) return apiProblem(args, 404, missing);
  const requestId = requestIdOf(args.context);
  return apiCall(args, async () => {
    if (method === "DELETE") {
      const id = new URL(args.request.url).searchParams.get("id");
      if (!isUuid(id)) return apiProblem(args, 404, "There is no such photo or lab sheet on this coupon.");
      await removeAttachment(db(), user, exposureId.toLowerCase(), id.toLowerCase(), requestId);
      return new Response(null, { status: 204, headers: { "Cache-Control": "no-store" } });
    }

    // Refuse early, before reading a possibly large body: other tenants 404, the owner's staff 403.
    const exposure = await exposureForLab(db(), user, exposureId.toLowerCase());
    if (!can(user, "recordWork"))
      throw new Forbidden("Only the contractor's technicians attach photos and lab sheets.");
    await consumeLimit("uploadsPerUser", user.id);
    const { file, fields } = await readMultipart(args.request);
    try {
      const parsed = uploadFields.safeParse(fields);
      if (!parsed.success)
        return apiProblem(args, 400, parsed.error.issues[0]?.message ?? "Check the form.", { field: "kind" });
      if (!file)
        return apiProblem(args, 400, "No file arrived: choose a photo or lab sheet and try again.", { field: "file" });
      const view = await uploadAttachment(db(), user, exposure.exposureId, file, parsed.data.kind, requestId);
      return json(view, { status: 201, headers: { Location: view.url } });
    } finally {
      await file?.discard();
    }
  });
}
