import { apiSites } from "~/models/api-directory.server";
import { apiProblem, json, methodNotAllowed, requireApiCaller } from "~/services/api.server";
import { db } from "~/services/db.server";
import { apiCall } from "~/services/respond.server";
import type { Route } from "./+types/api.v1.sites";

// GET /api/v1/sites → { items: [{ id, code, name, timeZone }] } — any scope; owner staff by session.
export async function loader(args: Route.LoaderArgs) {
  const caller = await requireApiCaller(args, "any");
  if (caller.organisation.kind !== "owner")
    return apiProblem(args, 404, "There is nothing here for your organisation.");
  if ([...new URL(args.request.url).searchParams.keys()].length > 0)
    return apiProblem(args, 400, "This endpoint takes no query parameters.", { field: "query" });
  return apiCall(args, async () => json({ items: await apiSites(db(), caller.ownerId) }));
}

export function action(args: Route.ActionArgs) {
  return methodNotAllowed(args, "GET");
}
