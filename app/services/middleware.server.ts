import { data, type MiddlewareFunction } from "react-router";
import { requestInfoContext, userContext, type SessionUser } from "../context";
import { env } from "./env.server";
import { problem } from "./problem.server";

/**
 * A body the Express entry refused (server.ts, the body limits table): answered before
 * any loader or action runs, as problem+json or as the app's error page, with the
 * connection closed so the rest of the body is never read.
 */
export const bodyRefusalGuard: MiddlewareFunction<Response> = async ({ context }, next) => {
  const info = context.get(requestInfoContext);
  const refusal = info.bodyRefusal;
  if (!refusal) return next();
  const headers = { Connection: "close" };
  if (refusal.answer === "problem")
    throw problem(refusal.status, refusal.message, { requestId: info.requestId, headers });
  throw data(refusal.message, { status: refusal.status, headers });
};

const safeMethods = new Set(["GET", "HEAD", "OPTIONS"]);

/**
 * Cross-site request forgery: a state-changing request whose Origin header names
 * another origin is refused. Requests without an Origin (scripts, curl, server-to-server)
 * are not cross-site by definition; browsers always send Origin on POST.
 */
export const crossSiteGuard: MiddlewareFunction<Response> = async ({ request, context }, next) => {
  if (!safeMethods.has(request.method)) {
    const origin = request.headers.get("Origin");
    const fetchSite = request.headers.get("Sec-Fetch-Site");
    const foreign = (origin !== null && origin !== env().APP_ORIGIN) || (origin === null && fetchSite === "cross-site");
    if (foreign) {
      const detail = "This request came from another site and was refused. Reload Wallcast and try again.";
      if (new URL(request.url).pathname.startsWith("/api/")) {
        throw problem(403, detail, { requestId: context.get(requestInfoContext).requestId });
      }
      throw data(detail, { status: 403 });
    }
  }
  return next();
};

/**
 * Loads the signed-in user (if any) for every loader and action, with the reader the
 * root passes in (the session model).
 */
export function sessionLoader(
  readUser: (request: Request) => Promise<SessionUser | null>,
): MiddlewareFunction<Response> {
  return async ({ request, context }, next) => {
    context.set(userContext, await readUser(request));
    return next();
  };
}
