import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { decide } from "../../app/models/review.server";
import { openBrowser, screenshot, signIn, startE2eApp, type Browser, type E2eApp } from "../helpers/e2e";
import { buildWorld, type World } from "../helpers/fixtures";
import { buildSurveyWorld, flag } from "../helpers/review-world";

/**
 * The engineer's review of a thickness survey in Chromium: the queue names the kind, and the
 * review page fits a 390 px phone, an 820 px tablet and a desktop, with the reading below
 * required thickness said in words.
 */

let app: E2eApp;
let browser: Browser;
let w: World;
let surveyId: string;

beforeAll(async () => {
  app = await startE2eApp();
  w = await buildWorld(app.db.knex);
  const s = await buildSurveyWorld(app.db.knex, w);
  const earlier = await s.submitSurvey([
    { cml: "TS-CML-01", measuredOn: "2025-11-20", thicknessMm: 3.0 },
    { cml: "TS-CML-02", measuredOn: "2025-11-20", thicknessMm: 7.25 },
  ]);
  const { version } = await app.db.knex("submissions").where({ id: earlier }).first("version");
  await decide(app.db.knex, w.users.engineer, earlier, { decision: "approve", version, comment: "", confirmed: true });
  surveyId = await s.submitSurvey([
    {
      cml: "TS-CML-01",
      measuredOn: "2026-11-20",
      thicknessMm: 2.75,
      quadrantsMm: [2.75, 2.9, 3.0, 2.95],
      flags: [flag.belowRequired("TS-CML-01", 2.75)],
    },
    { cml: "TS-CML-02", measuredOn: "2026-11-20", thicknessMm: 7.245, flags: [flag.belowResolution()] },
    { cml: "TS-CML-03", measuredOn: "2026-11-20", thicknessMm: 6.9 },
  ]);
  browser = await openBrowser();
  await signIn(browser.page, app.url, w.users.engineer.email);
});
afterAll(async () => {
  await browser?.close();
  await app?.stop();
});

describe("reviewing a thickness survey", () => {
  it("lists the survey in the queue with its kind and readings", async () => {
    const { page } = browser;
    await page.setViewportSize({ width: 1366, height: 900 });
    await page.goto(`${app.url}/review`);
    const row = page.locator("tr", { hasText: "Thickness survey" });
    await row.first().waitFor();
    expect(await row.first().innerText()).toContain("3 readings");
    await screenshot(page, "survey-review-queue");
  });

  for (const [name, size] of [
    ["phone", { width: 390, height: 844 }],
    ["tablet", { width: 820, height: 1180 }],
    ["desktop", { width: 1366, height: 900 }],
  ] as const)
    it(`fits the ${name} (${size.width} px) and says the reading below required thickness in words`, async () => {
      const { page } = browser;
      await page.setViewportSize(size);
      await page.goto(`${app.url}/review/${surveyId}`);
      await page.getByTestId("below-required").waitFor();
      expect(await page.getByTestId("below-required").innerText()).toContain("At or below required thickness");
      const { scrollWidth, innerWidth } = await page.evaluate(() => ({
        scrollWidth: document.documentElement.scrollWidth,
        innerWidth: window.innerWidth,
      }));
      expect(scrollWidth, `page wider than the ${name}`).toBeLessThanOrEqual(innerWidth);
      await expect(page.getByLabel("Why approve CML TS-CML-01 despite this warning").isVisible()).resolves.toBe(true);
      await screenshot(page, `survey-review-${name}`);
    });
});
