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

describe("a technician's coupon exchange", () => {
  it("finds an overdue pull, exchanges the coupon, enters lab results with a live preview and submits the packet", async () => {
    const { page } = browser;
    await signIn(page, app.url, "tech@monitoring.example");
    await page.goto(`${app.url}/pulls`);
    await expect(page.getByRole("heading", { name: "Pull schedule" }).count()).resolves.toBe(1);
    const row = page.getByRole("row").filter({ hasText: "BWR-CP-101" });
    await expect(row.getByText("overdue", { exact: true }).count()).resolves.toBe(1);
    await screenshot(page, "coupon-pull-schedule");

    await row.getByRole("link", { name: "Record exchange" }).click();
    await page.waitForURL(/\/exchange$/);
    const serial = await page.locator('select[name="installSerial"] option').nth(1).getAttribute("value");
    await page.locator('select[name="installSerial"]').selectOption(serial!);
    const now = await page.locator('input[name="removedAt"]').inputValue();
    await page.locator('input[name="installedAt"]').fill(now);
    await page.locator('select[name="pittingVisible"]').selectOption("yes");
    await page.getByLabel("Deposits").fill("thin black film");
    await screenshot(page, "coupon-exchange-form");
    await page.getByRole("button", { name: "Record exchange" }).click();
    await page.waitForURL(/\/lab\//);
    await page.waitForLoadState("networkidle");
    await screenshot(page, "coupon-lab-results-empty");

    const preview = page.getByRole("complementary", { name: "Live preview" });
    await expect(preview.getByText("Type the masses after cleaning").count()).resolves.toBe(1);
    const initialText = (await page.getByText(/^Initial mass/).locator("xpath=following-sibling::dd[1]").textContent()) ?? "";
    const initial = Number.parseFloat(initialText);
    expect(initial).toBeGreaterThan(10);
    await page.getByLabel("Coupon mass after cycle 1, grams").fill((initial - 0.45).toFixed(4));
    const firstRate = await preview.getByTestId("preview-rate").textContent();
    await page.getByLabel("Coupon mass after cycle 1, grams").fill((initial - 0.9).toFixed(4));
    const secondRate = await preview.getByTestId("preview-rate").textContent();
    expect(firstRate).not.toEqual(secondRate); // the preview follows the typing
    await page.getByLabel("Coupon mass after cycle 2, grams").fill((initial - 0.9015).toFixed(4));
    await page.getByLabel("Coupon mass after cycle 3, grams").fill((initial - 0.903).toFixed(4));
    await page.getByLabel("Deepest pit depths").fill("0.15 0.11");
    await expect(preview.getByText("Pitting factor").count()).resolves.toBe(1);
    await screenshot(page, "coupon-lab-results-preview");

    // a decimal comma is named as such, beside the field
    await page.getByLabel("Deepest pit depths").fill("0,15");
    await expect(page.getByText(/uses a decimal comma/).count()).resolves.toBeGreaterThan(0);
    await page.getByLabel("Deepest pit depths").fill("0.15 0.11");
    const previewRate = await preview.getByTestId("preview-rate").textContent();

    await page.getByRole("button", { name: "Save to the draft packet" }).click();
    await page.getByText(/saved in the draft packet/).waitFor();
    const storedRate = await page.getByRole("row").filter({ hasText: "BWR-CP-101" }).locator("td").nth(4).textContent();
    expect(previewRate).toContain(storedRate!.trim()); // the stored result is what the preview showed
    await page.getByRole("button", { name: /Submit packet/ }).click();
    await page.getByText(/submitted to Norvale Energy/).waitFor();
    await screenshot(page, "coupon-packet-submitted");
  });
});
