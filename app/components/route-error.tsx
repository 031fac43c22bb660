import { isRouteErrorResponse, Link, useLocation, useRouteError } from "react-router";
import { Card, PageHeader } from "./layout";

/**
 * The one error boundary of the data routes, rendered inside the app layout (the
 * navigation stays): what happened in words, and where to go from here. Routes re-export
 * it: `export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";`
 * 404 never says whether the record exists elsewhere; 403, 409 and 413 show the server's words.
 */
export function RouteErrorBoundary() {
  const error = useRouteError();
  const { pathname } = useLocation();
  const said = isRouteErrorResponse(error) && typeof error.data === "string" && error.data ? error.data : null;
  const status = isRouteErrorResponse(error) ? error.status : 500;

  let title = "Something went wrong";
  let detail =
    "The page could not be shown. Try again; if it keeps happening, tell your administrator the time it happened.";
  if (status === 404) {
    title = "Not found";
    detail = "There is nothing at this address, or it is not shared with your organisation.";
  } else if (status === 403) {
    title = "Not allowed";
    detail = said ?? "Your role does not allow this action.";
  } else if (status === 409) {
    title = "Changed in the meantime";
    detail =
      said ?? "Someone changed this record while you were working on it. Open it again to see its current state.";
  } else if (status === 413) {
    title = "Too much was sent";
    detail = said ?? "What was sent is larger than Wallcast takes here, so nothing of it was saved.";
  } else if (status === 400) {
    title = "That did not work";
    detail = said ?? "The request could not be understood. Go back and try again.";
  } else if (status === 429) {
    title = "Too many requests";
    detail = said ?? "Wallcast has had many requests from you in a short time. Wait a minute and try again.";
  } else if (said) {
    title = `${status} ${isRouteErrorResponse(error) ? error.statusText : ""}`.trim();
    detail = said;
  }

  // One level up is the list this record belongs to (/contracts/<id> → /contracts).
  const parent = pathname.replace(/\/+$/, "").split("/").slice(0, -1).join("/");
  return (
    <div className="max-w-2xl">
      <PageHeader title={title} />
      <Card>
        <p className="text-sm text-ink-soft" role="alert">
          {detail}
        </p>
        <p className="mt-4 flex flex-wrap gap-4 text-sm">
          {status === 409 ? <Link to={pathname}>Open this page again</Link> : null}
          {parent ? <Link to={parent}>Back to {parent}</Link> : null}
          <Link to="/">Go to the start page</Link>
        </p>
      </Card>
    </div>
  );
}
