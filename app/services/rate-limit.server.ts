import { createHash } from "node:crypto";
import type { Knex } from "knex";
import { RateLimiterPostgres, RateLimiterRes } from "rate-limiter-flexible";
import type { RouterContextProvider } from "react-router";
import { requestInfoContext } from "../context";
import { db } from "./db.server";
import { env } from "./env.server";
import { TooManyRequests } from "./outcome";

/**
 * Rate limits, counted in PostgreSQL (table `rate_limits`, made by a migration) through
 * rate-limiter-flexible, so every app process behind a load balancer shares one count.
 * The limiters are built with `tableCreated: true` and the app's Knex pool
 * (`storeType: "knex"`): nothing creates tables at run time.
 *
 * Each limit allows `points` requests per `seconds`; the defaults are in `rateLimitDefaults`
 * (and in DEVELOPERS.md). `RATE_LIMITS="auditViewsPerUser=3/60,uploadsPerUser=2/3600"`
 * overrides some of them (tests use small ones).
 *
 * Over a limit, `consumeLimit` throws `TooManyRequests` (429 with Retry-After), which
 * respond.server.ts turns into a page or a problem+json answer like every other outcome.
 * When the database cannot count (it is down), the request goes through: the limit
 * protects the service, an outage of the counter must not lock everyone out.
 */
export type RateLimitSpec = { points: number; seconds: number; what: string };

export const rateLimitDefaults = {
  /** /auth/login per login_hint (hashed) */
  signInStartPerEmail: {
    points: 10,
    seconds: 15 * 60,
    what: "Too many sign-ins were started for this e-mail address.",
  },
  /** /auth/login per client address */
  signInStartPerIp: { points: 100, seconds: 15 * 60, what: "Too many sign-ins were started from your network." },
  /** /auth/callback per verified e-mail address (hashed) */
  signInCallbackPerEmail: { points: 10, seconds: 15 * 60, what: "Too many sign-ins for this e-mail address." },
  /** /auth/callback per client address */
  signInCallbackPerIp: { points: 100, seconds: 15 * 60, what: "Too many sign-ins from your network." },
  /** photos and lab sheets, the lab CSV import and the coupon CSV import, together per person */
  uploadsPerUser: { points: 300, seconds: 60 * 60, what: "You have uploaded or imported many files in a short time." },
  /** the audit trail page per person */
  auditViewsPerUser: { points: 120, seconds: 60, what: "You have opened the audit trail many times in a short time." },
  /** the audit trail's CSV export per person */
  auditExportPerUser: { points: 20, seconds: 60 * 60, what: "You have downloaded the audit trail many times." },
  /** /api/v1 per API client (settable per client through `consumeApiClientLimit`'s perMinute) */
  apiClient: { points: 120, seconds: 60, what: "This API client has sent too many requests." },
} satisfies Record<string, RateLimitSpec>;

export type RateLimitName = keyof typeof rateLimitDefaults;

/** `name=points/seconds,…` → the specs it overrides; throws on an unknown name or a bad number. */
export function parseRateLimitOverrides(text: string | undefined): Partial<Record<RateLimitName, RateLimitSpec>> {
  const out: Partial<Record<RateLimitName, RateLimitSpec>> = {};
  for (const part of (text ?? "").split(",").map((p) => p.trim())) {
    if (!part) continue;
    const m = /^([A-Za-z]+)=(\d+)\/(\d+)$/.exec(part);
    if (!m) throw new Error(`RATE_LIMITS: "${part}" is not name=points/seconds`);
    const name = m[1] as RateLimitName;
    if (!(name in rateLimitDefaults)) throw new Error(`RATE_LIMITS: there is no limit called ${m[1]}`);
    const points = Number(m[2]);
    const seconds = Number(m[3]);
    if (points < 1 || seconds < 1) throw new Error(`RATE_LIMITS: ${part} needs at least 1 point and 1 second`);
    out[name] = { ...rateLimitDefaults[name], points, seconds };
  }
  return out;
}

/** A limiter on the shared table; `keyPrefix` keeps each limit's keys apart. */
export function createLimiter(conn: Knex, keyPrefix: string, spec: Pick<RateLimitSpec, "points" | "seconds">) {
  return new RateLimiterPostgres({
    storeClient: conn,
    storeType: "knex",
    tableName: "rate_limits",
    tableCreated: true,
    keyPrefix,
    points: spec.points,
    duration: spec.seconds,
  });
}

type Cached = { conn: Knex; spec: RateLimitSpec; limiter: RateLimiterPostgres };
const limiters = new Map<string, Cached>();

function limiterFor(name: RateLimitName, points?: number): Cached {
  const conn = db();
  const cacheKey = points === undefined ? name : `${name}@${points}`;
  const cached = limiters.get(cacheKey);
  if (cached && cached.conn === conn) return cached;
  const base = parseRateLimitOverrides(env().RATE_LIMITS)[name] ?? rateLimitDefaults[name];
  const spec = points === undefined ? base : { ...base, points };
  const made = { conn, spec, limiter: createLimiter(conn, name, spec) };
  limiters.set(cacheKey, made);
  return made;
}

/** The spec in force for a limit (defaults with RATE_LIMITS applied). */
export function rateLimitOf(name: RateLimitName): RateLimitSpec {
  return limiterFor(name).spec;
}

/** The client's address the Express entry saw (through the proxies TRUST_PROXY trusts). */
export function clientIpOf(context: Readonly<RouterContextProvider>): string {
  return context.get(requestInfoContext).clientIp;
}

/** An e-mail address is counted by its hash: the table holds no addresses. */
export const emailKey = (email: string) =>
  createHash("sha256").update(email.trim().toLowerCase()).digest("hex").slice(0, 40);

/**
 * Counts one request of `who` against the limit; throws TooManyRequests when it is
 * over. `points` replaces the limit's points (a per-client API allowance).
 */
export async function consumeLimit(name: RateLimitName, who: string, options: { points?: number } = {}) {
  const { limiter, spec } = limiterFor(name, options.points);
  try {
    await limiter.consume(who.slice(0, 200));
  } catch (thrown) {
    if (thrown instanceof RateLimiterRes) throw new TooManyRequests(spec.what, thrown.msBeforeNext / 1000);
    console.warn(`rate limit ${name} not counted: ${(thrown as Error).message}`);
  }
}

/**
 * The per-API-client limit: `perMinute` requests a minute (default 120, or what
 * RATE_LIMITS sets for apiClient), keyed by the client's id.
 */
export async function consumeApiClientLimit(clientId: string, perMinute?: number): Promise<void> {
  if (perMinute === undefined) return consumeLimit("apiClient", clientId);
  const { seconds } = rateLimitOf("apiClient");
  return consumeLimit("apiClient", clientId, { points: Math.max(1, Math.round((perMinute * seconds) / 60)) });
}
