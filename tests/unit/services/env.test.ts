import { describe, expect, it } from "vitest";
import { assertProductionSettings, insecureSettings, parseEnv } from "~/services/env.server";

const production = {
  APP_ORIGIN: "https://wallcast.example.com",
  SESSION_SECRETS: "a-long-random-production-secret,an-older-production-secret",
  OIDC_CLIENT_SECRET: "issued-by-the-identity-provider",
};

describe("production settings", () => {
  it("finds nothing wrong with own secrets and an https origin", () => {
    expect(insecureSettings(parseEnv(production))).toEqual([]);
    expect(() => assertProductionSettings(parseEnv(production))).not.toThrow();
  });

  it("names every insecure setting: demo secrets and plain http", () => {
    const problems = insecureSettings(parseEnv({}));
    expect(problems).toEqual([
      "SESSION_SECRETS still holds the demo secret: set your own (at least 16 random characters each).",
      "OIDC_CLIENT_SECRET is the demo secret: set the client secret your identity provider issued.",
      "APP_ORIGIN is http://127.0.0.1:3000: Wallcast must be served over https (set APP_ORIGIN=https://…).",
    ]);
    // the demo secret among rotated ones still counts
    expect(
      insecureSettings(
        parseEnv({
          ...production,
          SESSION_SECRETS: "a-long-random-production-secret,wallcast-demo-session-secret-change-me",
        }),
      ),
    ).toHaveLength(1);
  });

  it("refuses to start with them unless WALLCAST_ALLOW_INSECURE=1", () => {
    expect(() =>
      assertProductionSettings(parseEnv({ ...production, APP_ORIGIN: "http://wallcast.example.com" })),
    ).toThrow(/Wallcast refuses to start with insecure settings:\n {2}- APP_ORIGIN is http:\/\/wallcast\.example\.com/);
    expect(() =>
      assertProductionSettings(parseEnv({ ...production, OIDC_CLIENT_SECRET: "wallcast-demo-secret" })),
    ).toThrow(/OIDC_CLIENT_SECRET is the demo secret/);
    expect(() => assertProductionSettings(parseEnv({ WALLCAST_ALLOW_INSECURE: "1" }))).not.toThrow();
  });
});

describe("TRUST_PROXY", () => {
  it("is off by default and takes a hop count or addresses", () => {
    expect(parseEnv({}).TRUST_PROXY).toBe(false);
    expect(parseEnv({ TRUST_PROXY: "0" }).TRUST_PROXY).toBe(false);
    expect(parseEnv({ TRUST_PROXY: "1" }).TRUST_PROXY).toBe(1);
    expect(parseEnv({ TRUST_PROXY: "loopback" }).TRUST_PROXY).toBe("loopback");
    expect(parseEnv({ TRUST_PROXY: "10.0.0.0/8, uniquelocal" }).TRUST_PROXY).toBe("10.0.0.0/8, uniquelocal");
  });

  it("refuses anything else, such as trusting every proxy", () => {
    expect(() => parseEnv({ TRUST_PROXY: "true" })).toThrow(/TRUST_PROXY: use a hop count/);
    expect(() => parseEnv({ TRUST_PROXY: "proxy.internal" })).toThrow(/TRUST_PROXY/);
  });

  it("checks the shape of RATE_LIMITS", () => {
    expect(parseEnv({ RATE_LIMITS: "auditViewsPerUser=3/60" }).RATE_LIMITS).toBe("auditViewsPerUser=3/60");
    expect(() => parseEnv({ RATE_LIMITS: "auditViewsPerUser=lots" })).toThrow(/RATE_LIMITS/);
  });
});
