import { describe, expect, it } from "vitest";
import { TooManyRequests, waitInWords } from "~/services/outcome";
import { emailKey, parseRateLimitOverrides, rateLimitDefaults } from "~/services/rate-limit.server";
import { keepRetryAfter } from "~/services/retry-after";

describe("rate limit settings", () => {
  it("overrides named limits and keeps the words", () => {
    expect(parseRateLimitOverrides("auditViewsPerUser=3/60, uploadsPerUser=2/3600")).toEqual({
      auditViewsPerUser: { ...rateLimitDefaults.auditViewsPerUser, points: 3, seconds: 60 },
      uploadsPerUser: { ...rateLimitDefaults.uploadsPerUser, points: 2, seconds: 3600 },
    });
    expect(parseRateLimitOverrides(undefined)).toEqual({});
    expect(parseRateLimitOverrides("")).toEqual({});
  });

  it("refuses unknown names and impossible numbers", () => {
    expect(() => parseRateLimitOverrides("auditView=3/60")).toThrow("there is no limit called auditView");
    expect(() => parseRateLimitOverrides("auditViewsPerUser=0/60")).toThrow("at least 1 point");
    expect(() => parseRateLimitOverrides("auditViewsPerUser=3")).toThrow("is not name=points/seconds");
  });

  it("counts e-mail addresses by a hash that ignores case and spaces", () => {
    expect(emailKey(" Someone@Example.com ")).toBe(emailKey("someone@example.com"));
    expect(emailKey("someone@example.com")).toMatch(/^[0-9a-f]{40}$/);
    expect(emailKey("someone@example.com")).not.toBe(emailKey("someone.else@example.com"));
  });
});

describe("over a limit", () => {
  it("says when to try again in words and in whole seconds", () => {
    const e = new TooManyRequests("Too many sign-ins.", 39.2);
    expect(e.status).toBe(429);
    expect(e.retryAfterSeconds).toBe(40);
    expect(e.message).toBe("Too many sign-ins. Try again in 40 seconds.");
    expect(new TooManyRequests("Wait.", 0).retryAfterSeconds).toBe(1);
    expect(waitInWords(1)).toBe("1 second");
    expect(waitInWords(60)).toBe("1 minute");
    expect(waitInWords(61)).toBe("2 minutes");
    expect(waitInWords(3600)).toBe("1 hour");
    expect(waitInWords(7201)).toBe("3 hours");
  });

  it("passes Retry-After from a route's error or data on to the page", () => {
    const empty = new Headers();
    const parent = new Headers({ "X-Parent": "1" });
    const fromError = keepRetryAfter({
      parentHeaders: parent,
      loaderHeaders: empty,
      actionHeaders: empty,
      errorHeaders: new Headers({ "Retry-After": "40" }),
    });
    expect(fromError.get("Retry-After")).toBe("40");
    expect(fromError.get("X-Parent")).toBe("1");
    const fromLoader = keepRetryAfter({
      parentHeaders: parent,
      loaderHeaders: new Headers({ "Retry-After": "12" }),
      actionHeaders: empty,
      errorHeaders: undefined,
    });
    expect(fromLoader.get("Retry-After")).toBe("12");
    expect(
      keepRetryAfter({
        parentHeaders: parent,
        loaderHeaders: empty,
        actionHeaders: empty,
        errorHeaders: undefined,
      }).has("Retry-After"),
    ).toBe(false);
  });
});
