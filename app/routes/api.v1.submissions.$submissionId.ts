import { getSubmission } from "~/models/submissions.server";
import { apiProblem, json, methodNotAllowed, requireApiCaller } from "~/services/api.server";
import { db } from "~/services/db.server";
import { isUuid } from "~/services/guards.server";
import { apiCall } from "~/services/respond.server";
import type { Route } from "./+types/api.v1.submissions.$submissionId";

// GET /api/v1/submissions/:id → the submission with every result's inputs, computed values and basis
// (a thickness survey: every reading with its CML, circuit and flags).
export async function loader(args: Route.LoaderArgs) {
  const user = (await requireApiCaller(args, "results:read")).reader;
  const id = args.params.submissionId;
  const missing = () => apiProblem(args, 404, "No submission with this id is visible to you.");
  if (!isUuid(id)) return missing();
  return apiCall(args, async () => {
    const detail = await getSubmission(db(), user, id.toLowerCase());
    return json(
      detail.kind === "coupon"
        ? { ...detail.submission, results: detail.results }
        : { ...detail.submission, readings: detail.readings },
    );
  });
}

export function action(args: Route.ActionArgs) {
  return methodNotAllowed(args, "GET");
}
