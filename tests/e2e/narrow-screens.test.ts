import { afterAll, beforeAll, describe, expect, it } from "vitest";
import type { Locator, Page } from "playwright-core";
import {
  labResultsForm,
  openBrowser,
  screenshot,
  signIn,
  signOut,
  startE2eApp,
  type Browser,
  type E2eApp,
} from "../helpers/e2e";
import { buildCouponWorld, type CouponWorld } from "../helpers/e2e-world";
import { createUser, type UserRow } from "../helpers/fixtures";

/**
 * Every technician screen on a 390 px phone, an 820 px tablet and a 1024 px tablet held
 * sideways, and the owner's pages
 * on the tablet: nothing wider than the screen, the page's main action within reach
 * and big enough for a gloved finger, references and values with units on one line.
 */

const phone = { width: 390, height: 844 };
const tablet = { width: 820, height: 1180 };
const landscape = { width: 1024, height: 768 };
const widths = [phone, tablet, landscape];
const touchTarget = 44;

let app: E2eApp;
let browser: Browser;
let world: CouponWorld;
let admin: UserRow;

beforeAll(async () => {
  app = await startE2eApp();
  world = await buildCouponWorld(app.db.knex, {
    mailDomain: "narrow-screens.test",
    site: { name: "Eskerfield Tank Farm and Harbour Terminal", code: "ETH", timeZone: "Europe/Oslo" },
    pointTag: "ETH-CH-042",
    plannedExposureDays: 90,
    inServiceDays: 95,
  });
  admin = await createUser(app.db.knex, world.owner, {
    email: "admin@narrow-screens.test",
    name: "Maren Østby-Kallhagen",
    role: "administrator",
  });
  browser = await openBrowser();
});
afterAll(async () => {
  await browser?.close();
  await app?.stop();
});

type Box = { x: number; y: number; width: number; height: number };

async function fitsTheScreen(page: Page): Promise<{ scrollWidth: number; innerWidth: number }> {
  return page.evaluate(() => ({
    scrollWidth: document.documentElement.scrollWidth,
    innerWidth: window.innerWidth,
  }));
}

/** Every control a finger has to hit, shown on the page and shorter than a touch target. */
async function smallTouchTargets(page: Page, minimum: number): Promise<string[]> {
  return page.evaluate((min) => {
    const small: string[] = [];
    const controls = document.querySelectorAll<HTMLElement>(
      'button, select, textarea, summary, input:not([type="hidden"]):not([type="checkbox"]):not([type="radio"]):not([type="file"])',
    );
    for (const el of controls) {
      const r = el.getBoundingClientRect();
      if (r.width === 0 || r.height === 0) continue;
      if (r.height < min - 0.5)
        small.push(
          `${el.tagName.toLowerCase()} “${(el.textContent || el.getAttribute("aria-label") || el.getAttribute("name") || "").trim().slice(0, 40)}” ${r.height.toFixed(1)} px`,
        );
    }
    // a tick box or radio button is hit through its label
    for (const input of document.querySelectorAll<HTMLInputElement>('input[type="checkbox"], input[type="radio"]')) {
      const label = input.closest("label") ?? (input.id ? document.querySelector(`label[for="${input.id}"]`) : null);
      const r = (label ?? input).getBoundingClientRect();
      if (r.width === 0 || r.height === 0) continue;
      if (r.height < min - 0.5) small.push(`label of ${input.name} ${r.height.toFixed(1)} px`);
    }
    return small;
  }, minimum);
}

/** How many lines a piece of text takes where it first appears inside `scope`. */
async function linesOf(scope: Locator, text: string): Promise<number> {
  return scope.evaluate((root, wanted) => {
    const walker = document.createTreeWalker(root, NodeFilter.SHOW_TEXT);
    // the text may be split over neighbouring text nodes (React inserts none, but be safe)
    for (let node = walker.nextNode(); node; node = walker.nextNode()) {
      const at = node.textContent!.indexOf(wanted);
      if (at < 0) continue;
      const range = document.createRange();
      range.setStart(node, at);
      range.setEnd(node, at + wanted.length);
      const tops = new Set([...range.getClientRects()].map((r) => Math.round(r.top)));
      return tops.size;
    }
    return -1;
  }, text);
}

/**
 * The checks every page gets at every width: no sideways scrolling, the main action on
 * the screen and tall enough, every other control tall enough, a screenshot to look at.
 */
async function checkPage(page: Page, name: string, primary: Locator) {
  await page.waitForLoadState("networkidle");
  const size = page.viewportSize()!;
  const shot = `narrow-${name}-${size.width}`;
  await screenshot(page, shot);
  const { scrollWidth, innerWidth } = await fitsTheScreen(page);
  expect(scrollWidth, `${shot}: the page is wider than the screen`).toBeLessThanOrEqual(innerWidth);
  await primary.scrollIntoViewIfNeeded();
  const box: Box | null = await primary.boundingBox();
  expect(box, `${shot}: the main action is not shown`).not.toBeNull();
  expect(box!.x, `${shot}: the main action starts off the screen`).toBeGreaterThanOrEqual(0);
  expect(box!.x + box!.width, `${shot}: the main action ends off the screen`).toBeLessThanOrEqual(innerWidth);
  expect(box!.height, `${shot}: the main action is too small to tap`).toBeGreaterThanOrEqual(touchTarget - 0.5);
  expect(await smallTouchTargets(page, touchTarget), `${shot}: controls too small to tap`).toEqual([]);
}

describe("a technician on a phone and on a tablet", () => {
  it("reaches every page through the compact menu, and the menu holds who is signed in", async () => {
    const { page } = browser;
    await page.setViewportSize(phone);
    await signIn(page, app.url, world.tech.email);
    await page.goto(`${app.url}/`);
    const menu = page.getByRole("navigation", { name: "Main" });
    // closed, the menu shows none of its links
    await expect(menu.getByRole("link", { name: "Pull schedule" }).isVisible()).resolves.toBe(false);
    await page.getByText("Menu", { exact: true }).click();
    await expect(menu.getByRole("link", { name: "Pull schedule" }).isVisible()).resolves.toBe(true);
    const opened = page.locator("header details");
    await expect(opened.getByText(world.tech.name).isVisible()).resolves.toBe(true);
    await expect(opened.getByText(world.contractor.name).isVisible()).resolves.toBe(true);
    await expect(opened.getByRole("button", { name: "Sign out" }).isVisible()).resolves.toBe(true);
    await screenshot(page, "narrow-menu-open-390");
    await menu.getByRole("link", { name: "Pull schedule" }).click();
    await page.waitForURL(/\/pulls$/);
    await page.getByRole("heading", { name: "Pull schedule" }).waitFor();
    // after the navigation the menu is closed again
    await expect(menu.getByRole("link", { name: "Submissions" }).isVisible()).resolves.toBe(false);
  });

  it("home, pull schedule, profile and the exchange form fit every width", async () => {
    const { page } = browser;
    for (const size of widths) {
      await page.setViewportSize(size);
      await page.goto(`${app.url}/`);
      await checkPage(page, "home", page.getByRole("link", { name: /Overdue pulls/ }));

      await page.goto(`${app.url}/pulls`);
      const row = page.getByRole("row").filter({ hasText: world.pointTag });
      await checkPage(page, "pulls", row.getByRole("link", { name: "Record exchange" }));
      expect(await linesOf(row, world.pointTag)).toBe(1);
      expect(await linesOf(row, `${world.site.code}-S-1000`)).toBe(1);

      await page.goto(`${app.url}/profile`);
      await checkPage(page, "profile", page.getByRole("button", { name: "Save units" }));

      await page.goto(`${app.url}/pulls/${world.pointId}/exchange`);
      await checkPage(page, "exchange", page.getByRole("button", { name: "Record exchange" }));
      expect(await linesOf(page.locator("main"), `${world.site.code}-S-1000`)).toBe(1);
    }
  });

  it("records the exchange and the lab results on the phone, then checks lab and submission pages at every width", async () => {
    const { page } = browser;
    const lab = labResultsForm(page);
    await page.setViewportSize(phone);
    await page.goto(`${app.url}/pulls/${world.pointId}/exchange`);
    await page.locator('select[name="installSerial"]').selectOption(world.stockSerials[0]);
    await page.locator('input[name="installedAt"]').fill(await page.locator('input[name="removedAt"]').inputValue());
    await page.getByRole("button", { name: "Record exchange" }).click();
    await page.waitForURL(/\/lab\//);
    const labUrl = page.url();

    for (const size of widths) {
      await page.setViewportSize(size);
      await page.goto(labUrl);
      await checkPage(page, "lab", page.getByRole("button", { name: "Save to the draft submission" }));
      const facts = page.locator("section", { has: page.getByRole("heading", { name: "Coupon and exposure" }) });
      expect(await linesOf(facts, world.pointTag)).toBe(1);
    }

    await page.setViewportSize(phone);
    await page.goto(labUrl);
    await lab.fillCouponLosses([0.45, 0.4515, 0.453]);
    await lab.fillPitDepths("0.15 0.11");
    await lab.saveToDraftSubmission();
    await page.waitForURL(/\/submissions\//);
    const submissionUrl = page.url();
    const reference = (await page.getByRole("heading", { level: 1 }).textContent())!.replace("Submission ", "").trim();
    expect(reference).toMatch(new RegExp(`^${world.site.code}-SUB-\\d+$`));

    for (const size of widths) {
      await page.setViewportSize(size);
      await page.goto(submissionUrl);
      await checkPage(page, "submission", page.getByRole("button", { name: `Submit to ${world.owner.name}` }));
      const result = page.getByRole("row").filter({ hasText: world.pointTag });
      expect(await linesOf(result, world.pointTag)).toBe(1);
      expect(await linesOf(result, "0.4530 g")).toBe(1);
      expect(await linesOf(result, "mm/y")).toBe(1);

      await page.goto(`${app.url}/submissions`);
      const listed = page.getByRole("row").filter({ hasText: reference });
      await checkPage(page, "submissions", listed.getByRole("link", { name: reference }));
      expect(await linesOf(listed, reference)).toBe(1);
    }

    await page.setViewportSize(phone);
    await page.goto(submissionUrl);
    await page.getByRole("button", { name: `Submit to ${world.owner.name}` }).click();
    await page.getByText(new RegExp(`submitted to ${world.owner.name}`)).waitFor();
    await screenshot(page, "narrow-submission-submitted-390");
    await page.getByText("Menu", { exact: true }).click();
    await signOut(page);
  });
});

describe("the owner's pages on a tablet", () => {
  it("review queue, review page, set-up, audit trail and people fit 820 px", async () => {
    const { page } = browser;
    await page.setViewportSize(tablet);
    await signIn(page, app.url, world.engineer.email);
    await page.goto(`${app.url}/review`);
    const queued = page.getByRole("row").filter({ hasText: `${world.site.code}-SUB-` });
    await checkPage(page, "owner-review-queue", queued.getByRole("link"));
    await queued.getByRole("link").click();
    await page.waitForURL(/\/review\/[0-9a-f-]+$/);
    await checkPage(page, "owner-review", page.getByRole("button", { name: "Approve submission" }));
    await page.goto(`${app.url}/setup`);
    await checkPage(page, "owner-setup", page.getByRole("link", { name: "Coupon stock" }));
    await page.goto(`${app.url}/audit`);
    await checkPage(page, "owner-audit", page.getByRole("link", { name: /Download CSV/ }));
    // the settings with the rate policy and the recompute button on a phone and a tablet; a desktop
    // (pointer-sized controls) only has to fit
    for (const size of [phone, tablet]) {
      await page.setViewportSize(size);
      await page.goto(`${app.url}/setup/settings`);
      await checkPage(page, "owner-settings", page.getByRole("button", { name: "Recompute remaining life" }));
    }
    await page.setViewportSize({ width: 1440, height: 900 });
    await page.goto(`${app.url}/setup/settings`);
    await page.waitForLoadState("networkidle");
    await screenshot(page, "narrow-owner-settings-1440");
    const desktop = await fitsTheScreen(page);
    expect(desktop.scrollWidth).toBeLessThanOrEqual(desktop.innerWidth);
    await page.setViewportSize(tablet);
    await page.getByText("Menu", { exact: true }).click();
    await signOut(page);

    await signIn(page, app.url, admin.email);
    await page.goto(`${app.url}/admin/members`);
    await checkPage(page, "owner-people", page.getByRole("button", { name: "Invite", exact: true }));
  });
});

describe("the circuit set-up pages on a phone and a tablet", () => {
  it("the circuit page with its CMLs and the import page fit 390 and 820 px", async () => {
    const { page } = browser;
    const circuit = await app.db.knex("circuits").where({ site_id: world.site.id }).first("id");
    await app.db.knex("circuits").where({ id: circuit.id }).update({
      nps: "6",
      schedule: "40",
      outside_diameter_mm: 168.3,
      outside_diameter_from_table: true,
      nominal_wall_mm: 7.11,
      nominal_wall_from_table: true,
    });
    const [cml] = await app.db
      .knex("cmls")
      .insert([
        {
          owner_id: world.owner.id,
          circuit_id: circuit.id,
          tag: "ETH-OVHD-01-E02",
          component: "elbow",
          location: "first elbow after the separator outlet, outer radius",
        },
        {
          owner_id: world.owner.id,
          circuit_id: circuit.id,
          tag: "ETH-OVHD-01-N03",
          component: "nozzle",
          injection_point: true,
          baseline_thickness_mm: 7.02,
          baseline_on: "2019-05-14",
        },
      ])
      .returning("id");
    await signIn(page, app.url, world.engineer.email);
    for (const size of [phone, tablet]) {
      await page.setViewportSize(size);
      await page.goto(`${app.url}/setup/circuits/${circuit.id}`);
      await checkPage(page, "owner-circuit", page.getByRole("button", { name: "Add CML" }));
      await page.goto(`${app.url}/setup/circuits/${circuit.id}?cml=${cml.id}`);
      await checkPage(page, "owner-circuit-cml", page.getByRole("button", { name: "Record replacement" }));
      await page.goto(`${app.url}/setup/sites/${world.site.id}/import`);
      await checkPage(page, "owner-import", page.getByRole("button", { name: "Check and import" }).first());
    }
  });
});
