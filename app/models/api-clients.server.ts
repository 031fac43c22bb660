import { blank, isCalendarDate, plainCharacters, wholeNumber } from "../services/form-fields";
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
  expires_at: Date | null;
  requests_per_minute: number | null;
};

/** What the API knows about the caller behind a valid token. */
export type ApiClientIdentity = {
  id: string;
  owner_id: string;
  owner_name: string;
  name: string;
  scopes: ApiScope[];
  /** null = the apiClient default of the rate limits table */
  requests_per_minute: number | null;
};

/** A bearer token looked up: the client, or why it is refused (each a 401). */
export type TokenLookup = { client: ApiClientIdentity } | { refused: "unknown" | "revoked" | "expired" };

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
  // The last day the token works (UTC); blank = no expiry.
  expiresOn: z
    .unknown()
    .optional()
    .transform((raw, ctx): string | null => {
      if (blank(raw)) return null;
      const text = typeof raw === "string" ? raw.trim() : "";
      if (!isCalendarDate(text)) {
        ctx.addIssue({ code: "custom", message: "Give the last day as a real date, YYYY-MM-DD, or leave it empty." });
        return z.NEVER;
      }
      if (text < new Date().toISOString().slice(0, 10)) {
        ctx.addIssue({ code: "custom", message: "The last day cannot be in the past (UTC)." });
        return z.NEVER;
      }
      return text;
    }),
  requestsPerMinute: z.preprocess(
    (v) => (blank(v) ? undefined : v),
    wholeNumber("the request limit", "requests a minute", 1, 100000).optional(),
  ),
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
      "a.expires_at",
      "a.requests_per_minute",
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
        // the token works through the whole of its last day, UTC
        expires_at: v.expiresOn ? new Date(Date.parse(`${v.expiresOn}T00:00:00Z`) + 86_400_000).toISOString() : null,
        requests_per_minute: v.requestsPerMinute ?? null,
      })
      .returning<Array<{ id: string }>>(["id"]);
    await record({
      action: "api_client.created",
      recordType: "api_client",
      recordId: row.id,
      after: {
        name,
        scopes,
        token_hint: tokenHint,
        expires_on: v.expiresOn,
        requests_per_minute: v.requestsPerMinute ?? null,
      },
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
 * The client behind a bearer token, or why it is refused (malformed or unknown, revoked,
 * expired). Looks the token up by its hash and records the use of a valid one; last_used_at
 * is written at most once a minute per client so a busy LIMS does not turn every read into
 * a write.
 */
export async function lookUpApiToken(conn: Db, token: string): Promise<TokenLookup> {
  if (typeof token !== "string" || !tokenPattern.test(token)) return { refused: "unknown" };
  const result = await conn.raw<{
    rows: Array<ApiClientIdentity & { revoked: boolean; expired: boolean }>;
  }>(
    `with found as (
       select a.id, a.owner_id, o.name as owner_name, a.name, a.scopes, a.requests_per_minute, a.last_used_at,
              a.revoked_at is not null as revoked, coalesce(a.expires_at <= now(), false) as expired
         from api_clients a join organisations o on o.id = a.owner_id
        where a.token_hash = ?
     ), touched as (
       update api_clients a set last_used_at = now()
         from found f
        where a.id = f.id and not f.revoked and not f.expired
          and (f.last_used_at is null or f.last_used_at < now() - interval '1 minute')
       returning a.id
     )
     select f.id, f.owner_id, f.owner_name, f.name, f.scopes, f.requests_per_minute, f.revoked, f.expired from found f`,
    [hashToken(token)],
  );
  const row = result.rows[0];
  if (!row) return { refused: "unknown" };
  if (row.revoked) return { refused: "revoked" };
  if (row.expired) return { refused: "expired" };
  return {
    client: {
      id: row.id,
      owner_id: row.owner_id,
      owner_name: row.owner_name,
      name: row.name,
      scopes: row.scopes,
      requests_per_minute: row.requests_per_minute,
    },
  };
}
