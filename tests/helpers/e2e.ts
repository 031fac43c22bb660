import { spawn, type ChildProcess } from "node:child_process";
import { freePort } from "./ports";
import { mkdtempSync, mkdirSync, rmSync } from "node:fs";
import os from "node:os";
import path from "node:path";
import { fileURLToPath } from "node:url";
import { chromium, type BrowserContext, type Page } from "playwright-core";
import { createTestDatabase, type TestDatabase } from "./db";

const root = fileURLToPath(new URL("../..", import.meta.url));
export const screenshotsDir = path.join(root, "test-results", "screenshots");

export type E2eApp = { url: string; db: TestDatabase; stop(): Promise<void> };

/** One app process: the production build served by server.ts on a free loopback port. */
export type AppProcess = {
  url: string;
  /** Everything the process wrote to stdout and stderr so far (for a failing test's message). */
  output(): string;
  stop(): Promise<void>;
};

/** Starts server.ts against the given database; several may share one database. */
export async function startAppProcess(db: TestDatabase, extraEnv: Record<string, string> = {}): Promise<AppProcess> {
  const port = await freePort();
  const url = `http://127.0.0.1:${port}`;
  const child: ChildProcess = spawn(process.execPath, ["--import", "tsx", path.join(root, "server.ts")], {
    cwd: root,
    env: {
      ...process.env,
      NODE_ENV: "production",
      PORT: String(port),
      HOST: "127.0.0.1",
      DATABASE_URL: db.url,
      APP_ORIGIN: url,
      WALLCAST_ALLOW_INSECURE: "1", // demo secrets, plain http on loopback
      ...extraEnv,
    },
    stdio: ["ignore", "pipe", "pipe"],
  });
  let output = "";
  child.stdout!.on("data", (c) => (output += c));
  child.stderr!.on("data", (c) => (output += c));
  const deadline = Date.now() + 30_000;
  for (;;) {
    if (child.exitCode !== null) throw new Error(`the app exited early:\n${output}`);
    try {
      // Serving, and the job queue started (the line comes after both).
      const res = await fetch(`${url}/healthz`);
      if (res.ok && output.includes("Wallcast is serving")) break;
    } catch {
      /* not listening yet */
    }
    if (Date.now() > deadline) throw new Error(`the app did not answer within 30 s:\n${output}`);
    await new Promise((r) => setTimeout(r, 200));
  }
  return {
    url,
    output: () => output,
    async stop() {
      await new Promise<void>((resolve) => {
        if (child.exitCode !== null) return resolve();
        child.once("exit", () => resolve());
        child.kill("SIGTERM");
      });
    },
  };
}

/**
 * The production build served by server.ts on a free loopback port, against a fresh,
 * empty database (migrated, no demo data): each browser test file puts in the owners,
 * sites, people and coupons it needs with the fixtures (tests/helpers/fixtures.ts).
 */
export async function startE2eApp(): Promise<E2eApp> {
  const db = await createTestDatabase();
  const app = await startAppProcess(db);
  return {
    url: app.url,
    db,
    async stop() {
      await app.stop();
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

/**
 * Signs in without the picker: /auth/login passes the hint to the identity provider,
 * which signs any address in; the app then decides by its users table.
 */
export async function signIn(page: Page, appUrl: string, email: string): Promise<void> {
  await page.goto(`${appUrl}/auth/login?login_hint=${encodeURIComponent(email)}`);
  await page.waitForLoadState("networkidle");
}

/** Types an address into the identity provider's own sign-in page (as a person does). */
export async function signInOnProviderPage(page: Page, email: string): Promise<void> {
  await page.locator("#login_hint").fill(email);
  await page.getByRole("button", { name: "Continue" }).click();
}

export async function signOut(page: Page): Promise<void> {
  await page.getByRole("button", { name: "Sign out" }).click();
  await page.getByText("You are signed out.").waitFor();
}

/**
 * The lab-results screen of one removed coupon: masses are given as losses from the
 * coupon's initial mass (read from the page), so a test does not depend on the coupon.
 */
export function labResultsForm(page: Page) {
  return {
    async initialMassG(): Promise<number> {
      const text = await page
        .getByText(/^Initial mass/)
        .locator("xpath=following-sibling::dd[1]")
        .textContent();
      return Number.parseFloat(text ?? "");
    },
    /** Fills "Coupon mass after cycle N" with initial − loss, for cycles from `fromCycle`. */
    async fillCouponLosses(lossesG: number[], fromCycle = 1): Promise<void> {
      const initial = await this.initialMassG();
      for (const [i, loss] of lossesG.entries()) {
        await page.getByLabel(`Coupon mass after cycle ${fromCycle + i}, grams`).fill((initial - loss).toFixed(4));
      }
    },
    async fillBlank(initialG: number, massesG: number[]): Promise<void> {
      await page.getByLabel("Blank mass before cleaning").fill(initialG.toFixed(4));
      for (const [i, mass] of massesG.entries()) {
        await page.getByLabel(`Blank mass after cycle ${i + 1}, grams`).fill(mass.toFixed(4));
      }
    },
    async fillPitDepths(text: string): Promise<void> {
      await page.getByLabel("Deepest pit depths").fill(text);
    },
    async saveToDraftSubmission(): Promise<void> {
      await page.getByRole("button", { name: "Save to the draft submission" }).click();
      await page.getByText(/saved in the draft submission/).waitFor();
    },
    /** Submits the submission and waits for the confirmation naming the owner. */
    async submitSubmission(ownerName: string): Promise<void> {
      await page.getByRole("button", { name: /Submit to/ }).click();
      await page.getByText(new RegExp(`submitted to ${escapeRegExp(ownerName)}`)).waitFor();
    },
  };
}

export function escapeRegExp(text: string): string {
  return text.replace(/[.*+?^${}()|[\]\\]/g, "\\$&");
}
