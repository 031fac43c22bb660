import { afterAll, beforeAll, describe, expect, it } from "vitest";
import {
  escapeRegExp,
  openBrowser,
  screenshot,
  signIn,
  signInOnProviderPage,
  startE2eApp,
  type Browser,
  type E2eApp,
} from "../helpers/e2e";
import {
  createContract,
  createOrganisation,
  createSite,
  createUser,
  dateFromToday,
  type OrganisationRow,
  type SiteRow,
  type UserRow,
} from "../helpers/fixtures";

let app: E2eApp;
let browser: Browser;

// This file's own world (invented names): an owner with a refinery and a gas plant, a
// second unrelated owner, and an inspection contractor whose contract covers the
// refinery today and whose contract for the gas plant has ended.
let owner: OrganisationRow;
let refinery: SiteRow;
let gasPlant: SiteRow;
let foreignSite: SiteRow;
let engineer: UserRow;
let inspector: UserRow;

beforeAll(async () => {
  app = await startE2eApp();
  const knex = app.db.knex;
  owner = await createOrganisation(knex, "Hollinsby Energy", "owner");
  const owner2 = await createOrganisation(knex, "Dunmere Water Board", "owner");
  const inspection = await createOrganisation(knex, "Pellworth Inspection", "contractor");
  refinery = await createSite(knex, owner, { name: "Hollinsby Refinery", code: "HLR", timeZone: "America/Chicago" });
  gasPlant = await createSite(knex, owner, { name: "Crookhaven Gas Plant", code: "CGP", timeZone: "America/Denver" });
  foreignSite = await createSite(knex, owner2, {
    name: "Dunmere Treatment Works",
    code: "DTW",
    timeZone: "Europe/London",
  });
  engineer = await createUser(knex, owner, {
    email: "engineer@sign-in.test",
    name: "Ilse Marrow",
    role: "integrity_engineer",
  });
  inspector = await createUser(knex, inspection, {
    email: "tech@sign-in.test",
    name: "Oren Castellane",
    role: "contractor_technician",
    invitedBy: owner,
  });
  await createContract(knex, {
    owner,
    contractor: inspection,
    reference: "HLE-UT-001",
    scope: ["thickness_inspection"],
    sites: [refinery],
    startsOn: dateFromToday(-400),
    endsOn: dateFromToday(330),
  });
  await createContract(knex, {
    owner,
    contractor: inspection,
    reference: "HLE-UT-000",
    scope: ["thickness_inspection"],
    sites: [gasPlant],
    startsOn: dateFromToday(-700),
    endsOn: dateFromToday(-60),
  });
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
    // the identity provider's own page: the engineer types their address
    await signInOnProviderPage(page, engineer.email);
    await page.waitForURL(`${app.url}/`);
    const nav = page.getByRole("navigation", { name: "Main" });
    await expect(nav.getByRole("link", { name: "Contracts" }).count()).resolves.toBe(1);
    await expect(nav.getByRole("link", { name: "Audit trail" }).count()).resolves.toBe(1);
    await expect(nav.getByRole("link", { name: "People" }).count()).resolves.toBe(0);
    await expect(nav.getByRole("link", { name: "API clients" }).count()).resolves.toBe(0);
    await expect(
      page
        .getByRole("banner")
        .getByText(new RegExp(`Integrity engineer · ${escapeRegExp(owner.name)}`))
        // the narrow-screen menu holds the same words, hidden at this width
        .filter({ visible: true })
        .count(),
    ).resolves.toBe(1);
    await screenshot(page, "sign-in-engineer-home");

    await page.getByRole("button", { name: "Sign out" }).click();
    await page.getByText("You are signed out.").waitFor();
    await expect(page.getByRole("button", { name: "Sign out" }).count()).resolves.toBe(0);
  });

  it("shows a technician only the sites its contracts cover today", async () => {
    const { page } = browser;
    await signIn(page, app.url, inspector.email);
    await page.goto(`${app.url}/sites`);
    const table = page.getByRole("table");
    // the inspection contractor's contract for the gas plant has ended
    await expect(table.getByText(refinery.name).count()).resolves.toBe(1);
    await expect(table.getByText(gasPlant.name).count()).resolves.toBe(0);
    await expect(table.getByText(foreignSite.name).count()).resolves.toBe(0);
    await expect(table.getByText("Thickness inspection").count()).resolves.toBe(1);
    await screenshot(page, "sign-in-technician-sites");
    // sign-out passes through the provider's end-session page and comes back
    await page.getByRole("button", { name: "Sign out" }).click();
    await page.getByText("You are signed out.").waitFor();
    expect(new URL(page.url()).origin).toBe(app.url);
  });

  it("gives an unknown e-mail the no-access page and no session", async () => {
    const { page } = browser;
    await page.goto(`${app.url}/auth/login`);
    await signInOnProviderPage(page, "stranger@elsewhere.example");
    await page.waitForURL(/\/auth\/no-access/);
    await expect(page.getByRole("heading", { name: "You have no access to Wallcast yet" }).count()).resolves.toBe(1);
    await screenshot(page, "sign-in-no-access");
    const me = await page.request.get(`${app.url}/api/v1/me`);
    expect(me.status()).toBe(401);
  });
});
