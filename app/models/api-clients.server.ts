import { createHash, randomBytes } from "node:crypto";
import { z } from "zod";
import type { SessionUser } from "../context";
import type { Db } from "../services/db.server";
import { isUuid } from "../services/guards.server";
import { actorOf, recordAudit } from "./audit.server";

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

type FieldErrors = Record<string, string>;
/** 400: the input needs correcting; 404: no such client for this owner. */
export type ApiClientOutcome<T> = ({ ok: true } & T) | { ok: false; status: 400 | 404; errors: FieldErrors };
export type CreateApiClientOutcome = ApiClientOutcome<{
  clientId: string;
  name: string;
  token: string;
  tokenHint: string;
}>;
export type RevokeApiClientOutcome = ApiClientOutcome<{ changed: boolean; name: string }>;

const fieldErrorsOf = (error: z.ZodError): FieldErrors =>
  Object.fromEntries(Object.entries(z.flattenError(error).fieldErrors).map(([k, v]) => [k, (v as string[])[0]]));

const tokenPattern = /^wct_[A-Za-z0-9_-]{43}$/;
export const hashToken = (token: string) => createHash("sha256").update(token, "utf8").digest("hex");
const newToken = () => `wct_${randomBytes(32).toString("base64url")}`;

export const newApiClientSchema = z.object({
  name: z
    .string({ error: "Name the client, e.g. “Brackwater LIMS”." })
    .trim()
    .min(1, "Name the client, e.g. “Brackwater LIMS”.")
    .max(100, "Keep the name under 100 characters."),
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
    .select(
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
): Promise<CreateApiClientOutcome> {
  const parsed = newApiClientSchema.safeParse(input);
  if (!parsed.success) return { ok: false, status: 400, errors: fieldErrorsOf(parsed.error) };
  const name = parsed.data.name;
  const scopes = apiScopes.filter((s) => parsed.data.scopes.includes(s));
  const ownerId = admin.organisation.id;
  const token = newToken();
  const tokenHint = token.slice(0, 12);
  return conn.transaction(async (trx): Promise<CreateApiClientOutcome> => {
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
    await recordAudit(trx, {
      ownerId,
      actor: actorOf(admin),
      action: "api_client.created",
      recordType: "api_client",
      recordId: row.id,
      after: { name, scopes, token_hint: tokenHint },
      requestId,
    });
    return { ok: true, clientId: row.id, name, token, tokenHint };
  });
}

/** Revokes a client: its token stops working on the next request. */
export async function revokeApiClient(
  conn: Db,
  admin: SessionUser,
  clientId: string,
  requestId?: string | null,
): Promise<RevokeApiClientOutcome> {
  const missing: RevokeApiClientOutcome = {
    ok: false,
    status: 404,
    errors: { clientId: "There is no such API client in your organisation." },
  };
  if (!isUuid(clientId)) return missing;
  const ownerId = admin.organisation.id;
  return conn.transaction(async (trx): Promise<RevokeApiClientOutcome> => {
    const current = await trx("api_clients")
      .where({ id: clientId, owner_id: ownerId })
      .forUpdate()
      .first<{ id: string; name: string; scopes: string[]; token_hint: string; revoked_at: Date | null } | undefined>(
        "id",
        "name",
        "scopes",
        "token_hint",
        "revoked_at",
      );
    if (!current) return missing;
    if (current.revoked_at) return { ok: true, changed: false, name: current.name };
    const [updated] = await trx("api_clients")
      .where({ id: current.id, owner_id: ownerId })
      .update({ revoked_at: trx.fn.now(), revoked_by: admin.id })
      .returning<Array<{ revoked_at: Date }>>(["revoked_at"]);
    await recordAudit(trx, {
      ownerId,
      actor: actorOf(admin),
      action: "api_client.revoked",
      recordType: "api_client",
      recordId: current.id,
      before: { name: current.name, token_hint: current.token_hint, revoked_at: null },
      after: { name: current.name, token_hint: current.token_hint, revoked_at: updated.revoked_at.toISOString() },
      requestId,
    });
    return { ok: true, changed: true, name: current.name };
  });
}

/**
 * The client behind a bearer token, or null (malformed, unknown or revoked). Looks
 * the token up by its hash and records the use; last_used_at is written at most once
 * a minute per client so a busy LIMS does not turn every read into a write.
 */
export async function findApiClientByToken(conn: Db, token: string): Promise<ApiClientIdentity | null> {
  if (typeof token !== "string" || !tokenPattern.test(token)) return null;
  const result = await conn.raw(
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
  return (result.rows[0] as ApiClientIdentity | undefined) ?? null;
}
