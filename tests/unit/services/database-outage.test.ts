import { RouterContextProvider } from "react-router";
import { describe, expect, it } from "vitest";
import { requestInfoContext } from "~/context";
import { isDatabaseUnavailable } from "~/services/db.server";
import { databaseOutage } from "~/services/middleware.server";
import { noteOutage } from "~/services/respond.server";

const withCode = (message: string, code: string) => Object.assign(new Error(message), { code });

describe("isDatabaseUnavailable", () => {
  it("knows a database that cannot be reached just now", () => {
    const knexTimeout = new Error("Knex: Timeout acquiring a connection. The pool is probably full.");
    knexTimeout.name = "KnexTimeoutError";
    const unavailable = [
      withCode("connect ECONNREFUSED 127.0.0.1:5432", "ECONNREFUSED"),
      withCode("read ECONNRESET", "ECONNRESET"),
      withCode("terminating connection due to administrator command", "57P01"),
      withCode("the database system is starting up", "57P03"),
      withCode("connection failure", "08006"),
      knexTimeout,
      new Error("Connection terminated unexpectedly"),
      new Error("timeout exceeded when trying to connect"),
      new AggregateError([withCode("connect ECONNREFUSED ::1:5432", "ECONNREFUSED")], ""),
    ];
    expect(unavailable.map(isDatabaseUnavailable)).toEqual(unavailable.map(() => true));
  });

  it("leaves the request's and the code's own faults alone", () => {
    const others = [
      withCode('duplicate key value violates unique constraint "sites_owner_code_key"', "23505"),
      withCode("canceling statement due to statement timeout", "57014"),
      withCode('relation "nowhere" does not exist', "42P01"),
      new TypeError("Cannot read properties of undefined"),
      "ECONNREFUSED",
      null,
    ];
    expect(others.map(isDatabaseUnavailable)).toEqual(others.map(() => false));
  });
});

describe("the databaseOutage middleware", () => {
  const contextFor = () => {
    const context = new RouterContextProvider();
    context.set(requestInfoContext, { requestId: "req-outage-1", nonce: "", clientIp: "127.0.0.1" });
    return context;
  };
  const run = (path: string, context: RouterContextProvider, response: Response) =>
    databaseOutage(
      { request: new Request(`http://127.0.0.1${path}`), context, params: {}, unstable_pattern: "" } as never,
      async () => response,
    ) as Promise<Response>;

  it("turns a 500 caused by an outage into a 503 page with Retry-After, keeping the page", async () => {
    const context = contextFor();
    noteOutage(context, withCode("connect ECONNREFUSED 127.0.0.1:5432", "ECONNREFUSED"));
    const res = await run("/audit", context, new Response("<h1>Something went wrong</h1>", { status: 500 }));
    expect([res.status, res.headers.get("Retry-After"), await res.text()]).toEqual([
      503,
      "10",
      "<h1>Something went wrong</h1>",
    ]);
  });

  it("answers problem+json on /api/v1", async () => {
    const context = contextFor();
    noteOutage(context, withCode("terminating connection due to administrator command", "57P01"));
    const res = await run("/api/v1/submissions", context, new Response("Unexpected Server Error", { status: 500 }));
    expect(res.status).toBe(503);
    expect(res.headers.get("Content-Type")).toBe("application/problem+json");
    expect(res.headers.get("Retry-After")).toBe("10");
    expect(await res.json()).toMatchObject({ status: 503, title: "Service unavailable", requestId: "req-outage-1" });
  });

  it("leaves a 500 of another cause a 500, and adds Retry-After to any 503 page", async () => {
    const plain = await run("/audit", contextFor(), new Response("boom", { status: 500 }));
    expect([plain.status, plain.headers.get("Retry-After")]).toEqual([500, null]);
    const refused = await run("/setup", contextFor(), new Response("down", { status: 503 }));
    expect([refused.status, refused.headers.get("Retry-After")]).toEqual([503, "10"]);
    const ok = await run("/setup", contextFor(), new Response("fine", { status: 200 }));
    expect(ok.status).toBe(200);
  });
});
