import { data, type MiddlewareFunction } from "react-router";
import { bearerContext, requestInfoContext, userContext, type BearerAuth, type SessionUser } from "../context";
import { isDatabaseUnavailable } from "./db.server";
import { env } from "./env.server";
import { problem } from "./problem.server";
import { metOutage, noteOutage, OUTAGE_RETRY_AFTER_SECONDS, outagePageError, outageProblem } from "./respond.server";

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
    // A request that carries a bearer token is judged by the token alone.
    if (context.get(bearerContext).kind !== "none") {
      context.set(userContext, null);
      return next();
    }
    let user: SessionUser | null;
    try {
      user = await readUser(request);
    } catch (error) {
      if (!isDatabaseUnavailable(error)) throw error;
      noteOutage(context, error);
      if (new URL(request.url).pathname.startsWith("/api/")) {
        throw outageProblem(context.get(requestInfoContext).requestId);
      }
      throw outagePageError();
    }
    context.set(userContext, user);
    return next();
  };
}

/**
 * Bearer tokens on /api: an `Authorization` header is looked up (the lookup is handed in by
 * root.tsx: services know no models) and judged alone — the session middleware after it
 * then ignores the cookie. Outside /api the header means nothing.
 */
export function bearerLoader(lookUp: (token: string) => Promise<BearerAuth>): MiddlewareFunction<Response> {
  return async ({ request, context }, next) => {
    const header = request.headers.get("authorization");
    if (header === null || !new URL(request.url).pathname.startsWith("/api/")) return next();
    const m = /^Bearer[ ]+([^\s]+)[ ]*$/i.exec(header);
    let found: BearerAuth;
    try {
      found = m ? await lookUp(m[1]) : { kind: "refused", reason: "malformed" };
    } catch (error) {
      if (!isDatabaseUnavailable(error)) throw error;
      noteOutage(context, error);
      throw outageProblem(context.get(requestInfoContext).requestId);
    }
    context.set(bearerContext, found);
    return next();
  };
}

/**
 * The first middleware. Every 503 answer gets a Retry-After header (a thrown page
 * error's own headers do not reach the document), and a request that failed with a 500
 * because the database could not be reached in a loader or action that uses none of
 * respond.server.ts's wrappers (entry.server.tsx's handleError notes it) answers 503
 * instead, with the same body (the error page; problem+json on /api/v1).
 */
export const databaseOutage: MiddlewareFunction<Response> = async ({ request, context }, next) => {
  const response = await next();
  const outage = response.status === 500 && metOutage(context);
  if (!outage && (response.status !== 503 || response.headers.has("Retry-After"))) return response;
  if (outage && new URL(request.url).pathname.startsWith("/api/")) {
    return outageProblem(context.get(requestInfoContext).requestId);
  }
  const headers = new Headers(response.headers);
  headers.set("Retry-After", String(OUTAGE_RETRY_AFTER_SECONDS));
  return new Response(response.body, { status: 503, statusText: "Service Unavailable", headers });
};
