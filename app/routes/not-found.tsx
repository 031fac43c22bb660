import { data } from "react-router";
import type { Route } from "./+types/not-found";

export function loader(_: Route.LoaderArgs) {
  throw data("There is nothing at this address.", { status: 404 });
}

export default function NotFound() {
  return null;
}

export const meta: Route.MetaFunction = () => [{ title: "Not found · Wallcast" }];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
