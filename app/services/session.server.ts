import { createHash, randomBytes } from "node:crypto";
import { createCookie } from "react-router";
import type { Role, SessionUser, Units } from "../context";
import { db } from "./db.server";
import { env } from "./env.server";

/**
 * Sessions live in the database; the cookie carries only a random id, signed with the
 * rotating SESSION_SECRETS (the first signs, all verify). The row stores the id's
 * sha256, so a read of the table cannot be replayed as a cookie.
 */
let cookie: ReturnType<typeof createCookie> | undefined;

export function sessionCookie() {
  const e = env();
  cookie ??= createCookie("wallcast_session", {
    httpOnly: true,
    sameSite: "lax",
    secure: e.APP_ORIGIN.startsWith("https://"),
    path: "/",
    secrets: e.SESSION_SECRETS,
    maxAge: e.SESSION_ABSOLUTE_HOURS * 3600,
  });
  return cookie;
}

export const hashId = (id: string) => createHash("sha256").update(id).digest("hex");

export async function createSession(userId: string, userAgent: string | null): Promise<string> {
  const id = randomBytes(32).toString("base64url");
  const e = env();
  await db()("sessions").insert({
    id_hash: hashId(id),
    user_id: userId,
    expires_at: db().raw(`now() + make_interval(hours => ?)`, [e.SESSION_ABSOLUTE_HOURS]),
    user_agent: userAgent?.slice(0, 300) ?? null,
  });
  return sessionCookie().serialize(id);
}

type Row = {
  id_hash: string;
  user_id: string;
  email: string;
  name: string;
  role: Role;
  units: Units;
  status: string;
  organisation_id: string;
  organisation_name: string;
  organisation_kind: "owner" | "contractor";
  idle_expired: boolean;
  touch: boolean;
};

/**
 * The user behind the request's cookie, or null. Expired (idle or absolute) sessions
 * and sessions of disabled users are deleted on sight.
 */
export async function readSession(request: Request): Promise<SessionUser | null> {
  const header = request.headers.get("Cookie");
  if (!header) return null;
  const id = await sessionCookie().parse(header);
  if (typeof id !== "string" || !/^[A-Za-z0-9_-]{43}$/.test(id)) return null;
  const idHash = hashId(id);
  const idle = env().SESSION_IDLE_MINUTES;
  const row = (await db()("sessions as s")
    .join("users as u", "u.id", "s.user_id")
    .join("organisations as o", "o.id", "u.organisation_id")
    .where("s.id_hash", idHash)
    .first(
      "s.id_hash",
      "u.id as user_id",
      "u.email",
      "u.name",
      "u.role",
      "u.units",
      "u.status",
      "o.id as organisation_id",
      "o.name as organisation_name",
      "o.kind as organisation_kind",
      db().raw("(s.expires_at <= now() or s.last_seen_at + make_interval(mins => ?) <= now()) as idle_expired", [idle]),
      db().raw("(s.last_seen_at < now() - interval '1 minute') as touch"),
    )) as Row | undefined;
  if (!row) return null;
  if (row.idle_expired || row.status !== "active") {
    await db()("sessions").where({ id_hash: idHash }).delete();
    return null;
  }
  if (row.touch) await db()("sessions").where({ id_hash: idHash }).update({ last_seen_at: db().fn.now() });
  return {
    id: row.user_id,
    email: row.email,
    name: row.name,
    role: row.role,
    units: row.units,
    organisation: { id: row.organisation_id, name: row.organisation_name, kind: row.organisation_kind },
    sessionIdHash: row.id_hash,
  };
}

/** Deletes the session row and returns a Set-Cookie that clears the cookie. */
export async function destroySession(request: Request): Promise<string> {
  const id = await sessionCookie().parse(request.headers.get("Cookie"));
  if (typeof id === "string")
    await db()("sessions")
      .where({ id_hash: hashId(id) })
      .delete();
  return sessionCookie().serialize("", { maxAge: 0 });
}

export async function destroyUserSessions(userId: string, trx = db()): Promise<void> {
  await trx("sessions").where({ user_id: userId }).delete();
}
