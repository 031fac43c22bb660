import knexFactory, { type Knex } from "knex";
import { RateLimiterRes } from "rate-limiter-flexible";
import { afterAll, beforeAll, describe, expect, it, vi } from "vitest";
import { closeDb } from "~/services/db.server";
import { resetEnvCache } from "~/services/env.server";
import { TooManyRequests } from "~/services/outcome";
import { consumeApiClientLimit, consumeLimit, createLimiter, rateLimitDefaults } from "~/services/rate-limit.server";
import { createTestDatabase, type TestDatabase } from "../helpers/db";

/**
 * The limits count in PostgreSQL, so app processes behind one load balancer share them:
 * two limiters on two connection pools (as two processes have) see one count.
 */
let t: TestDatabase;
const pools: Knex[] = [];

beforeAll(async () => {
  t = await createTestDatabase();
  process.env.DATABASE_URL = t.url;
  delete process.env.RATE_LIMITS;
  resetEnvCache();
});
afterAll(async () => {
  await Promise.all(pools.map((p) => p.destroy()));
  await closeDb();
  await t?.drop();
});

const pool = () => {
  const p = knexFactory({ client: "pg", connection: t.url, pool: { min: 0, max: 2 } });
  pools.push(p);
  return p;
};

describe("limits shared across processes", () => {
  it("counts the requests of two limiters on two pools against one limit", async () => {
    const first = createLimiter(pool(), "signInStartPerIp", { points: 3, seconds: 60 });
    const second = createLimiter(pool(), "signInStartPerIp", { points: 3, seconds: 60 });
    await first.consume("192.0.2.7");
    await second.consume("192.0.2.7");
    await first.consume("192.0.2.7");
    const refused = await second.consume("192.0.2.7").catch((e: unknown) => e);
    expect(refused).toBeInstanceOf(RateLimiterRes);
    expect((refused as RateLimiterRes).msBeforeNext).toBeGreaterThan(0);
    expect((refused as RateLimiterRes).msBeforeNext).toBeLessThanOrEqual(60_000);
    // another key, and the same key under another limit's prefix, start afresh
    await expect(first.consume("192.0.2.8")).resolves.toBeInstanceOf(RateLimiterRes);
    await expect(
      createLimiter(pool(), "signInCallbackPerIp", { points: 1, seconds: 60 }).consume("192.0.2.7"),
    ).resolves.toBeInstanceOf(RateLimiterRes);
    const rows = await t.knex("rate_limits").orderBy("key").select("key", "points");
    expect(rows).toEqual([
      { key: "signInCallbackPerIp:192.0.2.7", points: 1 },
      { key: "signInStartPerIp:192.0.2.7", points: 4 },
      { key: "signInStartPerIp:192.0.2.8", points: 1 },
    ]);
  });

  it("starts counting again once the window has passed", async () => {
    const limiter = createLimiter(pool(), "auditViewsPerUser", { points: 1, seconds: 1 });
    await limiter.consume("someone");
    await expect(limiter.consume("someone")).rejects.toBeInstanceOf(RateLimiterRes);
    await new Promise((r) => setTimeout(r, 1100));
    await expect(limiter.consume("someone")).resolves.toBeInstanceOf(RateLimiterRes);
  });
});

describe("the per-API-client limit", () => {
  it("allows 120 requests a minute per client by default, then answers with the wait", async () => {
    expect(rateLimitDefaults.apiClient).toMatchObject({ points: 120, seconds: 60 });
    for (let i = 0; i < 120; i++) await consumeApiClientLimit("client-a");
    const refused = await consumeApiClientLimit("client-a").catch((e: unknown) => e);
    expect(refused).toBeInstanceOf(TooManyRequests);
    expect((refused as TooManyRequests).status).toBe(429);
    expect((refused as TooManyRequests).retryAfterSeconds).toBeGreaterThanOrEqual(1);
    expect((refused as TooManyRequests).retryAfterSeconds).toBeLessThanOrEqual(60);
    expect((refused as TooManyRequests).message).toMatch(/^This API client has sent too many requests\. Try again in/);
    // another client has its own count
    await expect(consumeApiClientLimit("client-b")).resolves.toBeUndefined();
  });

  it("takes a per-client allowance", async () => {
    for (let i = 0; i < 5; i++) await consumeApiClientLimit("client-c", 5);
    await expect(consumeApiClientLimit("client-c", 5)).rejects.toBeInstanceOf(TooManyRequests);
    // a larger allowance for the same client counts the same requests
    await expect(consumeApiClientLimit("client-c", 10)).resolves.toBeUndefined();
  });

  it("lets requests through when the counter cannot be reached", async () => {
    const warn = vi.spyOn(console, "warn").mockImplementation(() => {});
    await t.knex.raw("alter table rate_limits rename to rate_limits_away");
    try {
      await expect(consumeLimit("uploadsPerUser", "someone")).resolves.toBeUndefined();
      expect(warn).toHaveBeenCalledWith(expect.stringMatching(/^rate limit uploadsPerUser not counted: /));
    } finally {
      warn.mockRestore();
      await t.knex.raw("alter table rate_limits_away rename to rate_limits");
    }
  });
});
