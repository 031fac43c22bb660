import sharp from "sharp";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import {
  labResultsForm,
  openBrowser,
  screenshot,
  signIn,
  startE2eApp,
  type Browser,
  type E2eApp,
} from "../helpers/e2e";
import { buildCouponWorld, type CouponWorld } from "../helpers/e2e-world";

let app: E2eApp;
let browser: Browser;
let world: CouponWorld;

beforeAll(async () => {
  app = await startE2eApp();
  // a coupon 97 days in against 90 planned: the pull is overdue
  world = await buildCouponWorld(app.db.knex, {
    mailDomain: "coupon-exchange.test",
    site: { name: "Eskerfield Refinery", code: "ESK", timeZone: "America/Chicago" },
    pointTag: "ESK-CH-101",
    plannedExposureDays: 90,
    inServiceDays: 97,
  });
  browser = await openBrowser();
});
afterAll(async () => {
  await browser?.close();
  await app?.stop();
});

describe("a technician's coupon exchange", () => {
  it("finds an overdue pull, exchanges the coupon, enters lab results with a live preview and submits the submission", async () => {
    const { page } = browser;
    const lab = labResultsForm(page);
    await signIn(page, app.url, world.tech.email);
    await page.goto(`${app.url}/pulls`);
    await expect(page.getByRole("heading", { name: "Pull schedule" }).count()).resolves.toBe(1);
    const row = page.getByRole("row").filter({ hasText: world.pointTag });
    await expect(row.getByText("overdue", { exact: true }).count()).resolves.toBe(1);
    await screenshot(page, "coupon-pull-schedule");

    await row.getByRole("link", { name: "Record exchange" }).click();
    await page.waitForURL(/\/exchange$/);
    const serial = await page.locator('select[name="installSerial"] option').nth(1).getAttribute("value");
    expect(world.stockSerials).toContain(serial); // the next coupon comes from the owner's stock
    await page.locator('select[name="installSerial"]').selectOption(serial!);
    const now = await page.locator('input[name="removedAt"]').inputValue();
    await page.locator('input[name="installedAt"]').fill(now);
    await page.locator('select[name="pittingVisible"]').selectOption("yes");
    await page.getByLabel("Deposits").fill("thin black film");
    await expect(page.getByText(/ESK-S-1001 · Carbon steel · strip/).count()).resolves.toBe(1); // material by name
    await screenshot(page, "coupon-exchange-form");
    await page.setViewportSize({ width: 390, height: 844 });
    await screenshot(page, "coupon-exchange-form-390");
    await page.setViewportSize({ width: 820, height: 1180 });
    await screenshot(page, "coupon-exchange-form-820");
    await page.setViewportSize({ width: 1366, height: 900 });
    await page.getByRole("button", { name: "Record exchange" }).click();
    await page.waitForURL(/\/lab\//);
    await page.waitForLoadState("networkidle");
    await screenshot(page, "coupon-lab-results-empty");

    const preview = page.getByRole("complementary", { name: "Live preview" });
    await expect(preview.getByText("Type the masses after cleaning").count()).resolves.toBe(1);
    expect(await lab.initialMassG()).toBeGreaterThan(10);
    // a dropped photo asks what it shows and does not upload before it is told
    await page.locator('input[type="file"]').setInputFiles({
      name: "pit at 6 o'clock.png",
      mimeType: "image/png",
      buffer: await sharp({ create: { width: 320, height: 240, channels: 3, background: "#6b5e4a" } })
        .png()
        .toBuffer(),
    });
    const queued = page.getByTestId("queued-file");
    await queued.waitFor();
    await expect(queued.getByRole("button", { name: /^Upload / }).isDisabled()).resolves.toBe(true);
    await expect(page.getByText(/Choose what one file shows before it uploads/).count()).resolves.toBe(1);
    await page.setViewportSize({ width: 390, height: 844 });
    await screenshot(page, "coupon-lab-photo-kind-390");
    await page.setViewportSize({ width: 1366, height: 900 });
    await queued.getByLabel("Shows").selectOption("pit_close_up");
    await queued.getByRole("button", { name: /^Upload / }).click();
    await page
      .getByTestId("attachment")
      .filter({ hasText: "Close-up of a pit" })
      .or(queued.getByRole("alert"))
      .first()
      .waitFor();
    await expect(queued.count()).resolves.toBe(0); // uploaded, filed as chosen

    await lab.fillCouponLosses([0.45]);
    const firstRate = await preview.getByTestId("preview-rate").textContent();
    await lab.fillCouponLosses([0.9]);
    const secondRate = await preview.getByTestId("preview-rate").textContent();
    expect(firstRate).not.toEqual(secondRate); // the preview follows the typing
    // a final mass beside cleaning-cycle masses is refused until a method is chosen
    await page.getByLabel("Final mass (if no cycles were weighed)").fill("35.0000");
    await expect(page.getByText(/Both a final mass and masses after cleaning cycles/).count()).resolves.toBeGreaterThan(
      0,
    );
    await page.getByLabel("Mass loss from").selectOption("last-cycle");
    await expect(page.getByText(/Both a final mass and masses after cleaning cycles/).count()).resolves.toBe(0);
    await page.getByLabel("Mass loss from").selectOption("");
    await page.getByLabel("Final mass (if no cycles were weighed)").fill("");
    await lab.fillCouponLosses([0.9015, 0.903], 2);
    await lab.fillPitDepths("0.15 0.11");
    await expect(preview.getByText("Pitting factor").count()).resolves.toBe(1);
    await screenshot(page, "coupon-lab-results-preview");

    // a decimal comma is named as such, beside the field
    await lab.fillPitDepths("0,15");
    await expect(
      page.getByText("Pit depths: 0,15 — use a point as the decimal mark (0.15).").count(),
    ).resolves.toBeGreaterThan(0);
    await lab.fillPitDepths("0.15 0.11");
    const previewRate = await preview.getByTestId("preview-rate").textContent();

    await lab.saveToDraftSubmission();
    const storedRate = await page
      .getByRole("row")
      .filter({ hasText: world.pointTag })
      .locator("td")
      .nth(4)
      .textContent();
    expect(previewRate).toContain(storedRate!.trim()); // the stored result is what the preview showed
    await lab.submitSubmission(world.owner.name);
    await screenshot(page, "coupon-submission-submitted");
  });
});
