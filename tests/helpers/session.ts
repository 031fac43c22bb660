import { createHash, randomBytes } from "node:crypto";
import type { Knex } from "knex";
import { createCookie } from "react-router";

/**
 * A signed-in browser without the identity provider: a session row plus the signed
 * cookie the app would have set (same name and default secret as
 * app/services/session.server.ts).
 */
const cookie = createCookie("wallcast_session", {
  secrets: (process.env.SESSION_SECRETS ?? "wallcast-demo-session-secret-change-me").split(","),
  path: "/",
});

export async function sessionCookieFor(knex: Knex, userId: string): Promise<string> {
  const id = randomBytes(32).toString("base64url");
  await knex("sessions").insert({
    id_hash: createHash("sha256").update(id).digest("hex"),
    user_id: userId,
    expires_at: knex.raw("now() + interval '1 day'"),
  });
  const header = await cookie.serialize(id);
  return header.split(";")[0];
}
