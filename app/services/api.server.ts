import type { RouterContextProvider } from "react-router";
import { bearerContext, userContext, type ApiClientReader, type Reader, type SessionUser } from "../context";
import { TooManyRequests } from "./outcome";
import { can } from "./permissions";
import { problem, requestIdOf } from "./problem.server";
import { consumeApiClientLimit } from "./rate-limit.server";

type Args = { request: Request; context: Readonly<RouterContextProvider> };

/** Session-authenticated JSON: a problem+json 401 when signed out (never a redirect). */
export function requireApiUser({ context }: Args): SessionUser {
  const user = context.get(userContext);
  if (!user)
    throw problem(401, "Sign in to use this endpoint (session cookie missing, expired or revoked).", {
      requestId: requestIdOf(context),
    });
  return user;
}

/** The scopes a token may hold; `sites` and `points` need any one of them. */
export type ApiScope = "lims:write" | "results:read" | "outlook:read";

/**
 * Who is calling an /api/v1 operation: an API client through its bearer token, or a
 * signed-in person through the session cookie (that person's role rules apply).
 */
export type ApiCaller = {
  via: "token" | "session";
  /** What model functions take: the person, or the client acting in its owner's data. */
  reader: Reader;
  /**
   * The organisation whose data the caller acts in: the token's owner, the person's owner,
   * or, for a contractor's session, the contractor itself (its models scope by contractor).
   */
  ownerId: string;
  organisation: { id: string; name: string; kind: "owner" | "contractor" };
  client: { id: string; name: string; scopes: string[] } | null;
  user: SessionUser | null;
  /** The audit trail's actor (app/models/audit.server.ts `Actor`). */
  actor: { userId: string | null; organisationId: string | null; label: string };
};

const refusalWords = {
  malformed: "The Authorization header must be “Bearer <token>”.",
  unknown: "The bearer token is not valid.",
  revoked: "The bearer token has been revoked; ask an administrator for a new API client.",
  expired: "The bearer token has expired; ask an administrator for a new API client.",
} as const;

function unauthorised(args: Args, detail: string, bearer: boolean): Response {
  return problem(401, detail, {
    requestId: requestIdOf(args.context),
    headers: {
      "WWW-Authenticate": bearer ? 'Bearer realm="wallcast", error="invalid_token"' : 'Bearer realm="wallcast"',
    },
  });
}

/** The person's role rules for what a scope stands for; null = allowed. */
function sessionRefusal(user: SessionUser, scope: ApiScope | "any"): { status: 403 | 404; detail: string } | null {
  if (scope === "lims:write")
    return user.organisation.kind === "owner" && can(user, "setUpSites")
      ? null
      : {
          status: 403,
          detail: "Your role does not allow posting LIMS samples (integrity engineers and administrators may).",
        };
  if (scope === "outlook:read")
    return user.organisation.kind === "owner" && can(user, "readOwnerData")
      ? null
      : { status: 404, detail: "There is nothing here for your organisation." };
  return null;
}

/**
 * Resolves the caller of an /api/v1 operation and checks that it may use it. A request with
 * an Authorization header is judged by the token alone (never by a cookie beside it): a
 * missing, malformed, unknown, revoked or expired token is a 401; a token without the scope a
 * 403 naming it; a token over its rate limit a 429 with Retry-After. Without the header the
 * session cookie decides (401 when signed out) and the person's role rules apply.
 */
export async function requireApiCaller(args: Args, scope: ApiScope | "any"): Promise<ApiCaller> {
  const bearer = args.context.get(bearerContext);
  if (bearer.kind === "refused") throw unauthorised(args, refusalWords[bearer.reason], true);
  if (bearer.kind === "bearer") {
    const c: ApiClientReader = bearer.client;
    if (scope !== "any" && !c.scopes.includes(scope))
      throw problem(403, `This token lacks the scope ${scope}, which this operation needs.`, {
        requestId: requestIdOf(args.context),
        extra: { scopeNeeded: scope },
      });
    try {
      await consumeApiClientLimit(c.clientId, c.requestsPerMinute ?? undefined);
    } catch (error) {
      if (!(error instanceof TooManyRequests)) throw error;
      throw problem(429, error.message, {
        requestId: requestIdOf(args.context),
        headers: { "Retry-After": String(error.retryAfterSeconds) },
      });
    }
    return {
      via: "token",
      reader: c,
      ownerId: c.organisation.id,
      organisation: c.organisation,
      client: { id: c.clientId, name: c.clientName, scopes: c.scopes },
      user: null,
      actor: { userId: null, organisationId: c.organisation.id, label: `API client ${c.clientName}` },
    };
  }
  const user = args.context.get(userContext);
  if (!user)
    throw unauthorised(
      args,
      "Send “Authorization: Bearer <token>” or sign in (session cookie missing, expired or revoked).",
      false,
    );
  const refusal = sessionRefusal(user, scope);
  if (refusal) throw problem(refusal.status, refusal.detail, { requestId: requestIdOf(args.context) });
  return {
    via: "session",
    reader: user,
    ownerId: user.organisation.id,
    organisation: user.organisation,
    client: null,
    user,
    actor: { userId: user.id, organisationId: user.organisation.id, label: user.email },
  };
}

export function apiProblem(args: Args, status: number, detail: string, extra?: Record<string, unknown>): Response {
  return problem(status, detail, { requestId: requestIdOf(args.context), extra });
}

/** A resource route's answer to a method it does not implement. */
export function methodNotAllowed(args: Args, allowed: string): Response {
  return problem(405, `${args.request.method} is not allowed here; use ${allowed}.`, {
    requestId: requestIdOf(args.context),
    headers: { Allow: allowed },
  });
}

export function json(body: unknown, init: ResponseInit = {}): Response {
  const headers = new Headers(init.headers);
  headers.set("Cache-Control", "no-store");
  return Response.json(body, { ...init, headers });
}
