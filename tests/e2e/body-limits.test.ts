import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { openBrowser, screenshot, signIn, startE2eApp, type Browser, type E2eApp } from "../helpers/e2e";
import { buildCouponWorld, type CouponWorld } from "../helpers/e2e-world";

let app: E2eApp;
let browser: Browser;
let world: CouponWorld;

beforeAll(async () => {
  app = await startE2eApp();
  world = await buildCouponWorld(app.db.knex, {
    mailDomain: "body-limits.test",
    site: { name: "Eskerfield Refinery", code: "ESK", timeZone: "Europe/Oslo" },
    pointTag: "ESK-CH-201",
    plannedExposureDays: 90,
    inServiceDays: 30,
  });
  browser = await openBrowser();
});
afterAll(async () => {
  await browser?.close();
  await app?.stop();
});

describe("a file over the import limit, in the browser", () => {
  it("shows the error page saying the file is larger than 2 MB, and imports nothing", async () => {
    const { page } = browser;
    await signIn(page, app.url, world.engineer.email);
    await page.goto(`${app.url}/setup/coupons`);
    const before = await app.db.knex("coupons").count({ n: "*" });
    const line = "serial,material,shape,length_mm,width_mm,thickness_mm,hole_mm,initial_mass_g\n";
    const csv = Buffer.from(line.repeat(Math.ceil((3 * 1024 * 1024) / line.length)));
    await page.locator('input[name="file"]').setInputFiles({ name: "stock.csv", mimeType: "text/csv", buffer: csv });
    await page.getByRole("button", { name: "Check and import" }).click();
    await page.getByRole("heading", { name: "Too much was sent" }).waitFor();
    await expect(
      page.getByText("The file is larger than 2 MB, the limit for one import; split it into several imports.").count(),
    ).resolves.toBe(1);
    await screenshot(page, "body-limit-csv-import");
    expect(await app.db.knex("coupons").count({ n: "*" })).toEqual(before);
  });
});
