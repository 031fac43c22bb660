import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { openBrowser, screenshot, signIn, startE2eApp, type Browser, type E2eApp } from "../helpers/e2e";

let app: E2eApp;
let browser: Browser;

beforeAll(async () => {
  app = await startE2eApp();
  browser = await openBrowser();
});
afterAll(async () => {
  await browser?.close();
  await app?.stop();
});

describe("signing in through the identity provider", () => {
  it("lets the engineer pick themself on the provider's page and shows the engineer's navigation", async () => {
    const { page } = browser;
    await page.goto(app.url);
    await page.getByRole("link", { name: "Sign in" }).first().click();
    // the demo identity provider's own page: one button per demo person
    await page.locator('button[name="login_hint"][value="engineer@owner.example"]').click();
    await page.waitForURL(`${app.url}/`);
    const nav = page.getByRole("navigation", { name: "Main" });
    await expect(nav.getByRole("link", { name: "Contracts" }).count()).resolves.toBe(1);
    await expect(nav.getByRole("link", { name: "Audit trail" }).count()).resolves.toBe(1);
    await expect(nav.getByRole("link", { name: "People" }).count()).resolves.toBe(0);
    await expect(nav.getByRole("link", { name: "API clients" }).count()).resolves.toBe(0);
    await expect(page.getByRole("banner").getByText(/Integrity engineer · Norvale Energy/).count()).resolves.toBe(1);
    await screenshot(page, "sign-in-engineer-home");

    await page.getByRole("button", { name: "Sign out" }).click();
    await page.getByText("You are signed out.").waitFor();
    await expect(page.getByRole("button", { name: "Sign out" }).count()).resolves.toBe(0);
  });

  it("shows a technician only the sites its contracts cover today", async () => {
    const { page } = browser;
    await signIn(page, app.url, "tech@inspection.example");
    await page.goto(`${app.url}/sites`);
    const table = page.getByRole("table");
    // the inspection contractor's contract for the gas plant has ended
    await expect(table.getByText("Brackwater Refinery").count()).resolves.toBe(1);
    await expect(table.getByText("Tarn Hollow Gas Plant").count()).resolves.toBe(0);
    await expect(table.getByText("Mossgiel Treatment Works").count()).resolves.toBe(0);
    await expect(table.getByText("Thickness inspection").count()).resolves.toBe(1);
    await screenshot(page, "sign-in-technician-sites");
    await page.getByRole("button", { name: "Sign out" }).click();
  });

  it("gives an unknown e-mail the no-access page and no session", async () => {
    const { page } = browser;
    await page.goto(`${app.url}/auth/login`);
    await page.locator("#login_hint").fill("stranger@elsewhere.example");
    await page.getByRole("button", { name: "Continue" }).click();
    await page.waitForURL(/\/auth\/no-access/);
    await expect(page.getByRole("heading", { name: "You have no access to Wallcast yet" }).count()).resolves.toBe(1);
    await screenshot(page, "sign-in-no-access");
    const me = await page.request.get(`${app.url}/api/v1/me`);
    expect(me.status()).toBe(401);
  });
});
