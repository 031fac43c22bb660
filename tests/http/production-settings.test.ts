import { spawn } from "node:child_process";
import path from "node:path";
import { fileURLToPath } from "node:url";
import type { Express } from "express";
import request from "supertest";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { productionApp, shutdownApp } from "../helpers/app";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld } from "../helpers/fixtures";

/**
 * Production start-up refuses insecure settings; on https the app sends HSTS and the
 * session cookie carries the __Host- prefix (Secure, Path=/, no Domain).
 */
const root = fileURLToPath(new URL("../..", import.meta.url));

/** server.ts without --local, with these settings; what it printed and its exit code. */
function start(settings: Record<string, string>): Promise<{ code: number | null; output: string }> {
  const env: NodeJS.ProcessEnv = { ...process.env, PORT: "0", ...settings };
  delete env.WALLCAST_ALLOW_INSECURE;
  if (settings.WALLCAST_ALLOW_INSECURE) env.WALLCAST_ALLOW_INSECURE = settings.WALLCAST_ALLOW_INSECURE;
  return new Promise((resolve) => {
    const child = spawn(process.execPath, ["--import", "tsx", path.join(root, "server.ts")], {
      cwd: root,
      env,
      stdio: ["ignore", "pipe", "pipe"],
    });
    let output = "";
    child.stdout.on("data", (c) => (output += c));
    child.stderr.on("data", (c) => (output += c));
    child.once("exit", (code) => resolve({ code, output }));
    setTimeout(() => child.kill("SIGTERM"), 20_000).unref();
  });
}

describe("starting in production", () => {
  it("refuses the demo secrets and plain http, naming each", async () => {
    const { code, output } = await start({ APP_ORIGIN: "http://wallcast.example.com" });
    expect(code).toBe(1);
    expect(output).toMatch(/Wallcast could not start: Wallcast refuses to start with insecure settings:/);
    expect(output).toMatch(/- SESSION_SECRETS still holds the demo secret/);
    expect(output).toMatch(/- OIDC_CLIENT_SECRET is the demo secret/);
    expect(output).toMatch(/- APP_ORIGIN is http:\/\/wallcast\.example\.com: Wallcast must be served over https/);
    expect(output).toMatch(/set WALLCAST_ALLOW_INSECURE=1/);
    expect(output).not.toMatch(/Wallcast is serving/);
  });

  it("refuses an http origin even with secrets of its own", async () => {
    const { code, output } = await start({
      APP_ORIGIN: "http://wallcast.example.com",
      SESSION_SECRETS: "a-long-random-production-secret",
      OIDC_CLIENT_SECRET: "issued-by-the-identity-provider",
    });
    expect(code).toBe(1);
    expect(output).toMatch(/- APP_ORIGIN is http:\/\/wallcast\.example\.com/);
    expect(output).not.toMatch(/SESSION_SECRETS|OIDC_CLIENT_SECRET/);
  });
});

describe("on https", () => {
  let db: TestDatabase;
  let app: Express;

  beforeAll(async () => {
    db = await createTestDatabase();
    process.env.DATABASE_URL = db.url;
    process.env.APP_ORIGIN = "https://wallcast.example.com";
    await buildWorld(db.knex);
    app = await productionApp();
  });
  afterAll(async () => {
    delete process.env.APP_ORIGIN;
    await shutdownApp();
    await db?.drop();
  });

  it("sends Strict-Transport-Security", async () => {
    const res = await request(app).get("/healthz");
    expect(res.headers["strict-transport-security"]).toBe("max-age=63072000; includeSubDomains");
  });

  it("names the session cookie __Host- and makes it Secure, Path=/ without Domain", async () => {
    const login = await request(app).get("/auth/login?login_hint=engineer%40one.test").expect(302);
    const state = (login.headers["set-cookie"] as unknown as string[]).find((c) => c.startsWith("wallcast_oidc:"))!;
    expect(state).toMatch(/; Secure/i);
    const atProvider = await fetch(login.headers.location, { redirect: "manual" });
    const back = new URL(atProvider.headers.get("location")!);
    expect(back.origin).toBe("https://wallcast.example.com");
    const done = await request(app)
      .get(back.pathname + back.search)
      .set("Cookie", state.split(";")[0])
      .expect(302);
    const cookies = done.headers["set-cookie"] as unknown as string[];
    const session = cookies.find((c) => c.startsWith("__Host-wallcast_session="));
    expect(session).toBeTruthy();
    expect(session).toMatch(/; Path=\/(;|$)/);
    expect(session).toMatch(/; Secure/i);
    expect(session).toMatch(/; HttpOnly/i);
    expect(session).not.toMatch(/Domain=/i);
    expect(cookies.some((c) => c.startsWith("wallcast_session="))).toBe(false);
    // the cleared state cookie keeps the attributes it was set with
    expect(cookies.find((c) => c.startsWith("wallcast_oidc:"))).toMatch(/Max-Age=0.*; Secure/);
    await request(app).get("/api/v1/me").set("Cookie", session!.split(";")[0]).expect(200);
  });
});

describe("without https", () => {
  it("sends no HSTS", async () => {
    const { createApp, loadBuild } = await import("../../server");
    const app = createApp({ build: await loadBuild(), logRequests: false, hsts: false });
    const res = await request(app).get("/favicon.ico");
    expect(res.headers["strict-transport-security"]).toBeUndefined();
  });
});
