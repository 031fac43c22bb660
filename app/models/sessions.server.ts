import type { Role, SessionUser, Units } from "../context";
import type { Db } from "../services/db.server";
import { env } from "../services/env.server";
import { hashId, newSessionId, sessionCookie, sessionIdOf } from "../services/session.server";

/**
 * Session rows. The cookie (app/services/session.server.ts) carries only a random id;
 * the row stores its sha256, so a read of the table cannot be replayed as a cookie.
 * Idle and absolute expiry are checked on every read; expired sessions and sessions of
 * disabled users are deleted on sight.
 */

type SessionUserRow = {
  id_hash: string;
  user_id: string;
  email: string;
  name: string;
  role: Role;
  units: Units;
  time_zone: string | null;
  default_time_zone: string | null;
  status: string;
  organisation_id: string;
  organisation_name: string;
  organisation_kind: "owner" | "contractor";
  idle_expired: boolean;
  touch: boolean;
};

/** Starts a session for the user and returns the Set-Cookie that carries it. */
export async function createSession(conn: Db, userId: string, userAgent: string | null): Promise<string> {
  const id = newSessionId();
  await conn("sessions").insert({
    id_hash: hashId(id),
    user_id: userId,
    expires_at: conn.raw(`now() + make_interval(hours => ?)`, [env().SESSION_ABSOLUTE_HOURS]),
    user_agent: userAgent?.slice(0, 300) ?? null,
  });
  return sessionCookie().serialize(id);
}

/**
 * The user behind the request's cookie, or null. Expired (idle or absolute) sessions
 * and sessions of disabled users are deleted on sight; a session last seen more than a
 * minute ago is touched.
 */
export async function readSession(conn: Db, request: Request): Promise<SessionUser | null> {
  const id = await sessionIdOf(request);
  if (id === null) return null;
  const idHash = hashId(id);
  const row: SessionUserRow | undefined = await conn("sessions as s")
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
      "u.time_zone",
      // An owner's first site; for a contractor, the first site of an owner it works for.
      conn.raw(`coalesce(
        (select st.time_zone from sites st where st.owner_id = o.id order by st.created_at, st.name limit 1),
        (select st.time_zone from contracts c join sites st on st.owner_id = c.owner_id
          where c.contractor_id = o.id order by c.created_at, st.created_at, st.name limit 1)
      ) as default_time_zone`),
      "u.status",
      "o.id as organisation_id",
      "o.name as organisation_name",
      "o.kind as organisation_kind",
      conn.raw("(s.expires_at <= now() or s.last_seen_at + make_interval(mins => ?) <= now()) as idle_expired", [
        env().SESSION_IDLE_MINUTES,
      ]),
      conn.raw("(s.last_seen_at < now() - interval '1 minute') as touch"),
    );
  if (!row) return null;
  if (row.idle_expired || row.status !== "active") {
    await conn("sessions").where({ id_hash: idHash }).delete();
    return null;
  }
  if (row.touch) await conn("sessions").where({ id_hash: idHash }).update({ last_seen_at: conn.fn.now() });
  return {
    id: row.user_id,
    email: row.email,
    name: row.name,
    role: row.role,
    units: row.units,
    timeZone: row.time_zone ?? row.default_time_zone ?? "UTC",
    timeZoneChosen: row.time_zone !== null,
    organisation: { id: row.organisation_id, name: row.organisation_name, kind: row.organisation_kind },
    sessionIdHash: row.id_hash,
  };
}

/** Deletes the request's session row and returns a Set-Cookie that clears the cookie. */
export async function destroySession(conn: Db, request: Request): Promise<string> {
  const id = await sessionIdOf(request, { anyShape: true });
  if (id !== null)
    await conn("sessions")
      .where({ id_hash: hashId(id) })
      .delete();
  return sessionCookie().serialize("", { maxAge: 0 });
}

/** Ends every session of the user (run inside the transaction that disables them). Returns how many ended. */
export async function destroyUserSessions(conn: Db, userId: string): Promise<number> {
  return conn("sessions").where({ user_id: userId }).delete();
}

/**
 * Deletes sessions past their idle or absolute expiry and sessions of people no longer
 * active, in batches of `batch` rows (short statements), and returns how many went. Run by
 * the `sessions.prune` job; a session read on sight is deleted by `readSession` anyway.
 */
export async function pruneExpiredSessions(conn: Db, batch = 5000): Promise<number> {
  let total = 0;
  for (;;) {
    const result = await conn.raw<{ rowCount: number | null }>(
      `delete from sessions where id_hash in (
         select s.id_hash from sessions s join users u on u.id = s.user_id
          where s.expires_at <= now()
             or s.last_seen_at + make_interval(mins => ?) <= now()
             or u.status <> 'active'
          limit ?)`,
      [env().SESSION_IDLE_MINUTES, batch],
    );
    const n = result.rowCount ?? 0;
    total += n;
    if (n < batch) return total;
  }
}
