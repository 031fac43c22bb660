import type { RouterContextProvider } from "react-router";
import { userContext, type SessionUser } from "../context";
import { problem, requestIdOf } from "./problem.server";

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
