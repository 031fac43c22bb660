import { json, methodNotAllowed, requireApiCaller } from "~/services/api.server";
import type { Route } from "./+types/api.v1.me";

// GET /api/v1/me → for a token: the client and its organisation; for a session: the person.
export async function loader(args: Route.LoaderArgs) {
  const caller = await requireApiCaller(args, "any");
  if (caller.client) return json({ client: caller.client, organisation: caller.organisation });
  const user = caller.user!;
  return json({
    email: user.email,
    name: user.name,
    role: user.role,
    units: user.units,
    organisation: user.organisation,
  });
}

export function action(args: Route.ActionArgs) {
  return methodNotAllowed(args, "GET");
}
