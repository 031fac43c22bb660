import { plainCharacters } from "../services/form-fields";
import { createHash, randomBytes } from "node:crypto";
import { z } from "zod";
import type { SessionUser } from "../context";
import type { Db } from "../services/db.server";
import { isUuid } from "../services/ids";
import { Forbidden, NotFoundInTenant, parseOrThrow } from "../services/outcome";
import { can } from "../services/permissions";
import { actorOf, auditedWrite } from "./audit.server";

/**
 * API clients: an owner's machine identities (the LIMS, the owner's other systems).
 * Each holds a bearer token `wct_<43 base64url characters>` (32 random bytes). The
 * token is shown once when the client is created; only its sha256 is stored, plus
 * its first 12 characters so people can tell clients apart.
 */

export const apiScopes = ["lims:write", "results:read", "outlook:read"];
export type ApiScope = (typeof apiScopes)[number];

export type ApiClientRow = {
  id: string;
  name: string;
  scopes: ApiScope[];
  token_hint: string;
  created_at: Date;
  created_by_email: string | null;
  last_used_at: Date | null;
  revoked_at: Date | null;
  revoked_by_email: string | null;
};

/** What the API knows about the caller behind a valid token. */
export type ApiClientIdentity = { id: string; owner_id: string; name: string; scopes: ApiScope[] };

/** A new client and its token (shown once). */
export type CreatedApiClient = { clientId: string; name: string; token: string; tokenHint: string };
export type RevokedApiClient = { changed: boolean; name: string };

/** The columns of api_clients that revoking reads. */
type ApiClientRecord = {
  id: string;
  owner_id: string;
  name: string;
  scopes: ApiScope[];
  token_hint: string;
  revoked_at: Date | null;
};

const tokenPattern = /^wct_[A-Za-z0-9_-]{43}$/;
export const hashToken = (token: string) => createHash("sha256").update(token, "utf8").digest("hex");
const newToken = () => `wct_${randomBytes(32).toString("base64url")}`;

export const newApiClientSchema = z.object({
  name: z
    .string({ error: "Name the client, e.g. “Brackwater LIMS”." })
    .trim()
    .min(1, "Name the client, e.g. “Brackwater LIMS”.")
    .max(100, "Keep the name under 100 characters.")
    .superRefine(plainCharacters("the name")),
  scopes: z
    .array(z.enum(apiScopes, { error: "Choose from lims:write, results:read and outlook:read." }), {
      error: "Tick at least one permission.",
    })
    .min(1, "Tick at least one permission."),
});

export async function listApiClients(conn: Db, ownerId: string): Promise<ApiClientRow[]> {
  return conn("api_clients as a")
    .leftJoin("users as cu", "cu.id", "a.created_by")
    .leftJoin("users as ru", "ru.id", "a.revoked_by")
    .where("a.owner_id", ownerId)
    .orderByRaw("a.revoked_at is not null, a.created_at desc")
    .select<ApiClientRow[]>(
      "a.id",
      "a.name",
      "a.scopes",
      "a.token_hint",
      "a.created_at",
      "cu.email as created_by_email",
      "a.last_used_at",
      "a.revoked_at",
      "ru.email as revoked_by_email",
    );
}

/**
 * Creates a client and returns its token. This is the only time the token exists
 * outside the caller's hands: show it once, never log or store it.
 */
export async function createApiClient(
  conn: Db,
  admin: SessionUser,
  input: unknown,
  requestId?: string | null,
): Promise<CreatedApiClient> {
  mayManageApiClients(admin);
  const v = parseOrThrow(newApiClientSchema, input);
  const name = v.name;
  const scopes = apiScopes.filter((s) => v.scopes.includes(s));
  const ownerId = admin.organisation.id;
  const token = newToken();
  const tokenHint = token.slice(0, 12);
  return auditedWrite(conn, { ownerId, actor: actorOf(admin), requestId }, async ({ trx, record }) => {
    const [row] = await trx("api_clients")
      .insert({
        owner_id: ownerId,
        name,
        scopes,
        token_hash: hashToken(token),
        token_hint: tokenHint,
        created_by: admin.id,
      })
      .returning<Array<{ id: string }>>(["id"]);
    await record({
      action: "api_client.created",
      recordType: "api_client",
      recordId: row.id,
      after: { name, scopes, token_hint: tokenHint },
    });
    return { clientId: row.id, name, token, tokenHint };
  });
}

/** Revokes a client: its token stops working on the next request. */
export async function revokeApiClient(
  conn: Db,
  admin: SessionUser,
  clientId: string,
  requestId?: string | null,
): Promise<RevokedApiClient> {
  mayManageApiClients(admin);
  if (!isUuid(clientId)) throw new NotFoundInTenant("API client");
  const ownerId = admin.organisation.id;
  return auditedWrite(conn, { ownerId, actor: actorOf(admin), requestId }, async ({ trx, record }) => {
    const current = await trx<ApiClientRecord>("api_clients")
      .where({ id: clientId, owner_id: ownerId })
      .forUpdate()
      .first("id", "name", "scopes", "token_hint", "revoked_at");
    if (!current) throw new NotFoundInTenant("API client");
    if (current.revoked_at) return { changed: false, name: current.name };
    const [updated] = await trx("api_clients")
      .where({ id: current.id, owner_id: ownerId })
      .update({ revoked_at: trx.fn.now(), revoked_by: admin.id })
      .returning<Array<{ revoked_at: Date }>>(["revoked_at"]);
    await record({
      action: "api_client.revoked",
      recordType: "api_client",
      recordId: current.id,
      before: { name: current.name, token_hint: current.token_hint, revoked_at: null },
      after: { name: current.name, token_hint: current.token_hint, revoked_at: updated.revoked_at.toISOString() },
    });
    return { changed: true, name: current.name };
  });
}

function mayManageApiClients(user: SessionUser) {
  if (!can(user, "manageApiClients")) throw new Forbidden("Your role does not allow this.");
}

/**
 * The client behind a bearer token, or null (malformed, unknown or revoked). Looks
 * the token up by its hash and records the use; last_used_at is written at most once
 * a minute per client so a busy LIMS does not turn every read into a write.
 */
export async function findApiClientByToken(conn: Db, token: string): Promise<ApiClientIdentity | null> {
  if (typeof token !== "string" || !tokenPattern.test(token)) return null;
  const result = await conn.raw<{ rows: ApiClientIdentity[] }>(
    `with found as (
       select id, owner_id, name, scopes, last_used_at
         from api_clients
        where token_hash = ? and revoked_at is null
     ), touched as (
       update api_clients a set last_used_at = now()
         from found f
        where a.id = f.id and a.revoked_at is null
          and (f.last_used_at is null or f.last_used_at < now() - interval '1 minute')
       returning a.id
     )
     select f.id, f.owner_id, f.name, f.scopes from found f`,
    [hashToken(token)],
  );
  return result.rows[0] ?? null;
}
