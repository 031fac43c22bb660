import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { openBrowser, screenshot, signIn, signOut, startE2eApp, type Browser, type E2eApp } from "../helpers/e2e";
import {
  createCircuit,
  createContract,
  createOrganisation,
  createSite,
  createUser,
  dateFromToday,
  type UserRow,
} from "../helpers/fixtures";
import { approvedReadings, cml, designCircuit } from "../helpers/survey-world";

let app: E2eApp;
let browser: Browser;
let tech: UserRow;
let engineer: UserRow;
let circuit: string;

beforeAll(async () => {
  app = await startE2eApp();
  const knex = app.db.knex;
  const owner = await createOrganisation(knex, "Halvbridge Petrochemicals", "owner");
  const contractor = await createOrganisation(knex, "Corrow Inspection Services", "contractor");
  const site = await createSite(knex, owner, { name: "Halvbridge Works", code: "HBW", timeZone: "Europe/London" });
  tech = await createUser(knex, contractor, {
    email: "tech@thickness-survey.test",
    name: "Ilse Marrow",
    role: "contractor_technician",
    invitedBy: owner,
  });
  engineer = await createUser(knex, owner, {
    email: "engineer@thickness-survey.test",
    name: "Oren Vastly",
    role: "integrity_engineer",
  });
  await createContract(knex, {
    owner,
    contractor,
    reference: "HBW-TI-001",
    scope: ["thickness_inspection"],
    sites: [site],
    startsOn: dateFromToday(-400),
    endsOn: null,
  });
  const circuitId = await createCircuit(knex, site, { unitTag: "U-20", circuitTag: "FEED-02", service: "naphtha" });
  circuit = circuitId;
  await designCircuit(knex, circuitId, { structuralMinimumMm: 3, reason: "owner's minimum for this service" });
  const elbow = await cml(
    knex,
    { ownerId: owner.id, circuitId },
    { tag: "FEED-02-01", component: "elbow", location: "after the pump" },
  );
  await cml(knex, { ownerId: owner.id, circuitId }, { tag: "FEED-02-02", injectionPoint: true });
  await approvedReadings(
    knex,
    { ownerId: owner.id, siteId: site.id, contractorId: contractor.id, createdBy: tech.id, reference: "HBW-SUB-90001" },
    [{ cmlId: elbow, circuitId, measuredOn: "2021-05-10", thicknessMm: 6.35 }],
  );
  browser = await openBrowser();
});
afterAll(async () => {
  await browser?.close();
  await app?.stop();
});

describe("a technician's thickness survey", () => {
  it("starts a survey, sees a live flag while typing a reading below required, saves and submits", async () => {
    const { page } = browser;
    await signIn(page, app.url, tech.email);
    await page.getByRole("link", { name: "Thickness surveys" }).first().click();
    await page.waitForURL(/\/surveys$/);
    await page.getByLabel(/FEED-02/).check();
    await page.getByRole("button", { name: "Start the survey" }).click();
    await page.waitForURL(/\/surveys\/[0-9a-f-]{36}$/);
    await page.waitForLoadState("networkidle");

    const row = page.getByTestId("cml-row").filter({ hasText: "FEED-02-01" });
    await row.waitFor();
    expect(await row.innerText()).toMatch(/Last approved: 6\.35 mm on 2021-05-10/);
    await row.getByLabel(/FEED-02-01 reading 1/).fill("2.9");
    // computed in the browser as it is typed: a warning in words and with its triangle, before anything is saved
    const flags = row.getByTestId("cml-flags");
    await flags.getByText(/at or below the circuit's required thickness of 3 mm/).waitFor();
    await expect(flags.getByText("Warning:").count()).resolves.toBe(1);
    await expect(flags.getByText("▲").count()).resolves.toBe(1);
    await expect(
      page
        .getByTestId("grid-summary")
        .getByText(/1 warning/)
        .count(),
    ).resolves.toBe(1);
    await expect(page.getByRole("button", { name: "Submit the survey" }).isDisabled()).resolves.toBe(true);
    await screenshot(page, "survey-grid-live-flag");
    for (const size of [
      { width: 390, height: 844 },
      { width: 820, height: 1180 },
    ]) {
      await page.setViewportSize(size);
      const widths = await page.evaluate(() => ({
        scroll: document.documentElement.scrollWidth,
        inner: window.innerWidth,
      }));
      expect(widths.scroll, `nothing wider than ${size.width} px`).toBeLessThanOrEqual(widths.inner);
      await screenshot(page, `survey-grid-${size.width}`);
    }
    await page.setViewportSize({ width: 1366, height: 900 });

    await page.getByRole("button", { name: "Save the readings" }).click();
    await page.getByText("1 reading saved.").waitFor();
    await page.getByRole("button", { name: "Submit the survey" }).click();
    await page.getByText(/submitted to Halvbridge Petrochemicals/).waitFor();
    await expect(page.getByText("revision 1").count()).resolves.toBe(1);
    const stored = await app.db
      .knex("thickness_readings as r")
      .join("submissions as s", "s.id", "r.submission_id")
      .where("s.status", "submitted")
      .first("r.thickness_mm", "r.flags");
    expect(Number(stored.thickness_mm)).toBe(2.9);
    expect(stored.flags.map((f: { code: string }) => f.code)).toContain("below-required");
    await screenshot(page, "survey-submitted");
  });

  it("the engineer approves it with a reason for the warning, and the circuit's remaining life reads through the API", async () => {
    const { page } = browser;
    await signOut(page);
    await signIn(page, app.url, engineer.email);
    await page.goto(`${app.url}/review`);
    await page
      .getByRole("link", { name: /HBW-SUB-/ })
      .first()
      .click();
    await page.waitForURL(/\/review\/[0-9a-f-]{36}$/);
    await page
      .getByText(/At or below required thickness/)
      .first()
      .waitFor();
    await page
      .getByLabel("Why approve CML FEED-02-01 despite this warning")
      .fill("Re-read on site; repair work order raised");
    await page.getByLabel(/once approved they are permanent/).check();
    await page.getByRole("button", { name: "Approve submission" }).click();
    await page
      .getByText(/approved/i)
      .first()
      .waitFor();
    await page.waitForLoadState("networkidle");
    const status = await app.db.knex("submissions").where({ kind: "thickness", status: "approved" }).count({ n: "*" });
    expect(Number(status[0].n)).toBe(2); // the earlier approved survey and this one

    // The approving transaction computed the circuit's life; the JSON endpoint reads it with the same session.
    const res = await page.request.get(`${app.url}/api/v1/circuits/${circuit}`);
    expect(res.status()).toBe(200);
    const body = await res.json();
    expect(body).toMatchObject({
      tag: "FEED-02",
      condition: "below_required",
      status: {
        code: "below_required",
        words: expect.stringMatching(/fitness-for-service assessment or repair needed/),
      },
      requiredThicknessMm: 3, // the owner's structural minimum of this circuit (designCircuit above)
      governingCmlTag: "FEED-02-01",
      // 0 years never stands alone: the reason says what it means
      remainingLifeYears: 0,
      remainingLifeReason: expect.stringMatching(/^Below required thickness — fitness-for-service/),
    });
    const list = await page.request.get(`${app.url}/api/v1/circuits`);
    const listed = (await list.json()).items.find((c: { id: string }) => c.id === circuit);
    expect(listed).toMatchObject({ condition: "below_required", governingCmlTag: "FEED-02-01" });
    // The owner's engineers hear of a CML that went below required thickness at once.
    const mail = await app.db
      .knex("email_outbox")
      .where("event_key", "like", "life.below_required%")
      .select("to_email");
    expect(mail.map((m) => m.to_email)).toContain(engineer.email);
    await screenshot(page, "survey-approved");
  });
});
