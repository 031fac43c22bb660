import { z } from "zod";
import { listSurveyAttachments, removeSurveyAttachment, uploadSurveyAttachment } from "~/models/attachments.server";
import { getSurvey } from "~/models/thickness-surveys.server";
import { surveyAttachmentKinds, surveyAttachmentKindWords } from "~/services/attachment-kinds";
import { apiProblem, json, methodNotAllowed, requireApiUser } from "~/services/api.server";
import { apiCall } from "~/services/respond.server";
import { db } from "~/services/db.server";
import { isUuid } from "~/services/guards.server";
import { requestIdOf } from "~/services/problem.server";
import { consumeLimit } from "~/services/rate-limit.server";
import { readMultipart } from "~/services/uploads.server";
import type { Route } from "./+types/surveys.$submissionId.attachments";

/**
 * The files of a thickness survey (session cookie; problem+json errors), as a coupon's:
 *
 *   GET                         → 200 { attachments: [...] }
 *   POST multipart file, kind   → 201 the attachment, or 400 / 403 / 404 / 409 / 413 / 415 / 503
 *   DELETE ?id=<attachmentId>   → 204, or 403 / 404 / 409
 */

const uploadFields = z.object({
  kind: z.enum(surveyAttachmentKinds, { error: `Choose what the file is: ${surveyAttachmentKindWords}.` }),
});

const missing = "There is no survey at this address, or it is not shared with your organisation.";

export async function loader(args: Route.LoaderArgs) {
  const user = requireApiUser(args);
  const id = args.params.submissionId;
  if (!isUuid(id)) return apiProblem(args, 404, missing);
  return apiCall(args, async () => {
    const survey = await getSurvey(db(), user, id.toLowerCase());
    return json({ attachments: await listSurveyAttachments(db(), user, survey) });
  });
}

export async function action(args: Route.ActionArgs) {
  const user = requireApiUser(args);
  const method = args.request.method;
  if (method !== "POST" && method !== "DELETE") return methodNotAllowed(args, "GET, POST, DELETE");
  const id = args.params.submissionId;
  if (!isUuid(id)) return apiProblem(args, 404, missing);
  const requestId = requestIdOf(args.context);
  return apiCall(args, async () => {
    if (method === "DELETE") {
      const attachmentId = new URL(args.request.url).searchParams.get("id");
      if (!isUuid(attachmentId)) return apiProblem(args, 404, "There is no such file on this survey.");
      await removeSurveyAttachment(db(), user, id.toLowerCase(), attachmentId.toLowerCase(), requestId);
      return new Response(null, { status: 204, headers: { "Cache-Control": "no-store" } });
    }
    // Refuse early, before reading a possibly large body: other tenants 404, the owner's staff 403.
    const survey = await getSurvey(db(), user, id.toLowerCase());
    await consumeLimit("uploadsPerUser", user.id);
    const { file, fields } = await readMultipart(args.request);
    try {
      const parsed = uploadFields.safeParse(fields);
      if (!parsed.success)
        return apiProblem(args, 400, parsed.error.issues[0]?.message ?? "Check the form.", { field: "kind" });
      if (!file)
        return apiProblem(args, 400, "No file arrived: choose the survey sheet, a photo or the export.", {
          field: "file",
        });
      const view = await uploadSurveyAttachment(db(), user, survey.id, file, parsed.data.kind, requestId);
      return json(view, { status: 201, headers: { Location: view.url } });
    } finally {
      await file?.discard();
    }
  });
}
