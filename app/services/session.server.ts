import { createHash, randomBytes } from "node:crypto";
import { createCookie } from "react-router";
import { env } from "./env.server";

/**
 * The session cookie. Sessions live in the database (the sessions model); the
 * cookie carries only a random id, signed with the rotating SESSION_SECRETS (the first
 * signs, all verify). The row stores the id's sha256, so a read of the table cannot be
 * replayed as a cookie. Over https the cookie is `__Host-wallcast_session`: the prefix makes
 * browsers insist on Secure, Path=/ and no Domain, so no sibling host can set or shadow it.
 */
let cookie: ReturnType<typeof createCookie> | undefined;

export function sessionCookie() {
  const e = env();
  const https = e.APP_ORIGIN.startsWith("https://");
  cookie ??= createCookie(https ? "__Host-wallcast_session" : "wallcast_session", {
    httpOnly: true,
    sameSite: "lax",
    secure: https,
    path: "/",
    secrets: e.SESSION_SECRETS,
    maxAge: e.SESSION_ABSOLUTE_HOURS * 3600,
  });
  return cookie;
}

export const hashId = (id: string) => createHash("sha256").update(id).digest("hex");

/** A new random session id (32 bytes, base64url: 43 characters). */
export const newSessionId = () => randomBytes(32).toString("base64url");

const sessionIdShape = /^[A-Za-z0-9_-]{43}$/;

/**
 * The session id in the request's signed cookie, or null. Only ids of the shape
 * newSessionId makes count, unless `anyShape` (sign-out deletes whatever it was given).
 */
export async function sessionIdOf(request: Request, options: { anyShape?: boolean } = {}): Promise<string | null> {
  const header = request.headers.get("Cookie");
  if (!header) return null;
  const id: unknown = await sessionCookie().parse(header);
  if (typeof id !== "string") return null;
  return options.anyShape || sessionIdShape.test(id) ? id : null;
}
