import { spawn, type ChildProcess } from "node:child_process";
import { mkdtempSync, mkdirSync, rmSync } from "node:fs";
import net from "node:net";
import os from "node:os";
import path from "node:path";
import { fileURLToPath } from "node:url";
import knexFactory from "knex";
import { chromium, type BrowserContext, type Page } from "playwright-core";
import config from "../../knexfile";
import { createTestDatabase, type TestDatabase } from "./db";

const root = fileURLToPath(new URL("../..", import.meta.url));
export const screenshotsDir = path.join(root, "test-results", "screenshots");

async function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const srv = net.createServer();
    srv.once("error", reject);
    srv.listen(0, "127.0.0.1", () => {
      const { port } = srv.address() as net.AddressInfo;
      srv.close(() => resolve(port));
    });
  });
}

export type E2eApp = { url: string; db: TestDatabase; stop(): Promise<void> };

/**
 * The production build served by server.ts on a free loopback port, against a fresh
 * database loaded with the demo scenario (browser tests walk through it as users do).
 */
export async function startE2eApp(): Promise<E2eApp> {
  const db = await createTestDatabase();
  const seeder = knexFactory({ ...config, connection: db.url });
  const log = console.log;
  console.log = () => undefined; // the seed's progress lines are not test output
  try {
    await seeder.seed.run();
  } finally {
    console.log = log;
    await seeder.destroy();
  }
  const port = await freePort();
  const url = `http://127.0.0.1:${port}`;
  const child: ChildProcess = spawn(process.execPath, ["--import", "tsx", path.join(root, "server.ts")], {
    cwd: root,
    env: { ...process.env, NODE_ENV: "production", PORT: String(port), HOST: "127.0.0.1", DATABASE_URL: db.url, APP_ORIGIN: url },
    stdio: ["ignore", "pipe", "pipe"],
  });
  let output = "";
  child.stdout!.on("data", (c) => (output += c));
  child.stderr!.on("data", (c) => (output += c));
  const deadline = Date.now() + 30_000;
  for (;;) {
    if (child.exitCode !== null) throw new Error(`the app exited early:\n${output}`);
    try {
      const res = await fetch(`${url}/healthz`);
      if (res.ok) break;
    } catch {
      /* not listening yet */
    }
    if (Date.now() > deadline) throw new Error(`the app did not answer within 30 s:\n${output}`);
    await new Promise((r) => setTimeout(r, 200));
  }
  return {
    url,
    db,
    async stop() {
      await new Promise<void>((resolve) => {
        if (child.exitCode !== null) return resolve();
        child.once("exit", () => resolve());
        child.kill("SIGTERM");
      });
      await db.drop();
    },
  };
}

export type Browser = { context: BrowserContext; page: Page; close(): Promise<void> };

/** Debian's Chromium through playwright-core, in a throw-away profile. */
export async function openBrowser(): Promise<Browser> {
  const profile = mkdtempSync(path.join(os.tmpdir(), "wallcast-e2e-"));
  const context = await chromium.launchPersistentContext(profile, {
    executablePath: "/usr/bin/chromium",
    headless: true,
    viewport: { width: 1366, height: 900 },
    args: [
      "--no-sandbox",
      "--disable-gpu",
      "--disable-quic",
      "--no-first-run",
      "--disable-background-networking",
      "--disable-component-update",
      "--disable-sync",
    ],
  });
  const page = context.pages()[0] ?? (await context.newPage());
  return {
    context,
    page,
    async close() {
      await context.close();
      rmSync(profile, { recursive: true, force: true });
    },
  };
}

export async function screenshot(page: Page, name: string): Promise<string> {
  mkdirSync(screenshotsDir, { recursive: true });
  const file = path.join(screenshotsDir, `${name}.png`);
  await page.screenshot({ path: file, fullPage: true });
  return file;
}

/** Signs in without the picker: /auth/login passes the hint to the identity provider. */
export async function signIn(page: Page, appUrl: string, email: string): Promise<void> {
  await page.goto(`${appUrl}/auth/login?login_hint=${encodeURIComponent(email)}`);
  await page.waitForLoadState("networkidle");
}
