import { circuitLifeDetail } from "~/models/circuit-life.server";
import { apiProblem, json, methodNotAllowed, requireApiCaller } from "~/services/api.server";
import { db } from "~/services/db.server";
import { isUuid } from "~/services/guards.server";
import { apiCall } from "~/services/respond.server";
import type { Route } from "./+types/api.v1.circuits.$circuitId";

// GET /api/v1/circuits/:id → design data, required thickness, each CML's figures, coupon rates, flags, basis, status.
export async function loader(args: Route.LoaderArgs) {
  const user = (await requireApiCaller(args, "outlook:read")).reader;
  const id = args.params.circuitId;
  if (!isUuid(id)) return apiProblem(args, 404, "No circuit with this id is visible to you.");
  return apiCall(args, async () => json(await circuitLifeDetail(db(), user, id.toLowerCase())));
}

export function action(args: Route.ActionArgs) {
  return methodNotAllowed(args, "GET");
}
