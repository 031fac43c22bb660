import { json, methodNotAllowed, requireApiUser } from "~/services/api.server";
import type { Route } from "./+types/api.v1.me";

export function loader(args: Route.LoaderArgs) {
  const user = requireApiUser(args);
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
