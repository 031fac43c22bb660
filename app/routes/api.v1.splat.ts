import { apiProblem } from "~/services/api.server";
import type { Route } from "./+types/api.v1.splat";

// Unknown /api/v1 paths answer with a problem+json 404, whatever the method.
export function loader(args: Route.LoaderArgs) {
  return apiProblem(args, 404, `There is no endpoint at ${new URL(args.request.url).pathname}.`);
}

export function action(args: Route.ActionArgs) {
  return apiProblem(args, 404, `There is no endpoint at ${new URL(args.request.url).pathname}.`);
}
