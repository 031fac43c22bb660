import path from "node:path";
import { mkdtempSync, writeFileSync } from "node:fs";
import os from "node:os";
import sharp from "sharp";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import {
  escapeRegExp,
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

let app: E2eApp;
let browser: Browser;
let world: CouponWorld;
const files = mkdtempSync(path.join(os.tmpdir(), "wallcast-e2e-files-"));

beforeAll(async () => {
  app = await startE2eApp();
  // a coupon 131 days in against 120 planned, at a gas plant
  world = await buildCouponWorld(app.db.knex, {
    mailDomain: "review.test",
    site: { name: "Eskerfield Gas Plant", code: "EGP", timeZone: "America/Denver" },
    pointTag: "EGP-CH-041",
    plannedExposureDays: 120,
    inServiceDays: 131,
  });
  browser = await openBrowser();
  // Two photos and a lab sheet, made here (invented content).
  // noisy pixels compress badly, so the photos are big enough (~1 MB) to show upload progress
  for (const name of ["as-removed.jpg", "after-cleaning.jpg"]) {
    const image = await sharp({
      create: {
        width: 1600,
        height: 1200,
        channels: 3,
        background: "#6e6e6e",
        noise: { type: "gaussian", mean: 110, sigma: 40 },
      },
    })
      .jpeg({ quality: 90 })
      .toBuffer();
    writeFileSync(path.join(files, name), image);
  }
  writeFileSync(
    path.join(files, "lab-sheet.pdf"),
    "%PDF-1.4\n1 0 obj<</Type/Catalog/Pages 2 0 R>>endobj 2 0 obj<</Type/Pages/Kids[3 0 R]/Count 1>>endobj 3 0 obj<</Type/Page/MediaBox[0 0 612 792]/Parent 2 0 R>>endobj\ntrailer<</Root 1 0 R>>\n%%EOF\n",
  );
});
afterAll(async () => {
  await browser?.close();
  await app?.stop();
});

describe("the owner's review of a submission", () => {
  let submissionUrl = "";
  let reference = "";

  it("technician: records an exchange, enters lab results, attaches photos and a lab sheet, submits", async () => {
    const { page } = browser;
    const lab = labResultsForm(page);
    await signIn(page, app.url, world.tech.email);
    await page.goto(`${app.url}/pulls`);
    await page
      .getByRole("row")
      .filter({ hasText: world.pointTag })
      .getByRole("link", { name: "Record exchange" })
      .click();
    await page.waitForURL(/\/exchange$/);
    await page.getByRole("button", { name: "Record exchange" }).click();
    await page.waitForURL(/\/lab\//);
    await lab.fillCouponLosses([0.3, 0.3015]);

    // attachments: two photos and a PDF, each with its kind, with progress shown
    const chooser = page.waitForEvent("filechooser");
    await page
      .getByRole("button", { name: /choose files|drop photos/i })
      .first()
      .click();
    await (
      await chooser
    ).setFiles([
      path.join(files, "as-removed.jpg"),
      path.join(files, "after-cleaning.jpg"),
      path.join(files, "lab-sheet.pdf"),
    ]);
    const queued = page.getByTestId("queued-file");
    await queued.nth(2).waitFor();
    await expect(queued.count()).resolves.toBe(3);
    // each photo asks what it shows; nothing uploads until it is told (the PDF is the lab sheet)
    await expect(page.getByRole("button", { name: /Upload all/ }).count()).resolves.toBe(0);
    await queued.nth(0).getByRole("combobox").selectOption("as_removed");
    await queued.nth(1).getByRole("combobox").selectOption("after_cleaning");
    // a slow uplink, as at a pipe rack, so the progress bars are seen
    const cdp = await browser.context.newCDPSession(page);
    await cdp.send("Network.emulateNetworkConditions", {
      offline: false,
      latency: 40,
      downloadThroughput: 4_000_000,
      uploadThroughput: 400_000,
    });
    await page.getByRole("button", { name: /Upload all 3/ }).click();
    await page.getByRole("progressbar").first().waitFor();
    await screenshot(page, "review-lab-uploading");
    await page.getByText("Attached (3)").waitFor({ timeout: 60_000 });
    await cdp.send("Network.emulateNetworkConditions", {
      offline: false,
      latency: 0,
      downloadThroughput: -1,
      uploadThroughput: -1,
    });
    await screenshot(page, "review-lab-with-attachments");

    await lab.saveToDraftSubmission();
    submissionUrl = page.url();
    reference = /Submission (\S+)/.exec((await page.getByRole("heading", { level: 1 }).textContent()) ?? "")?.[1] ?? "";
    expect(reference).toMatch(new RegExp(`^${world.site.code}-SUB-\\d{5}$`));
    await lab.submitSubmission(world.owner.name);
    await signOut(page);
  });

  it("engineer: finds it in the queue, sees the photos, returns it with a comment", async () => {
    const { page } = browser;
    await signIn(page, app.url, world.engineer.email);
    await page.goto(`${app.url}/review`);
    const submissionId = submissionUrl.split("/").pop()!;
    await page.locator(`a[href="/review/${submissionId}"]`).first().waitFor();
    await screenshot(page, "review-queue");
    await page.locator(`a[href="/review/${submissionId}"]`).first().click();
    await page.waitForURL(new RegExp(`/review/${submissionId}$`));
    await page.locator('img[src$="/thumbnail"]').nth(1).waitFor();
    await expect(page.locator('img[src$="/thumbnail"]').count()).resolves.toBe(2);
    await expect(page.getByTestId("attachment").filter({ hasText: "lab-sheet.pdf" }).count()).resolves.toBe(1);
    await screenshot(page, "review-page");
    // a return needs a comment
    await page.getByRole("button", { name: "Return to the contractor" }).click();
    await page.getByText(/a comment is required/).waitFor();
    await page
      .getByLabel("Comment to the contractor")
      .fill("Second cycle looks light: re-weigh the coupon and add the blank.");
    await page.getByRole("button", { name: "Return to the contractor" }).click();
    await page.getByText(new RegExp(`returned to ${escapeRegExp(world.contractor.name)}`)).waitFor();
    await signOut(page);
  });

  it("technician: sees the comment, edits and resubmits as revision 2", async () => {
    const { page } = browser;
    const lab = labResultsForm(page);
    await signIn(page, app.url, world.tech.email);
    await page.goto(submissionUrl);
    await page.getByText(/re-weigh the coupon and add the blank/).waitFor();
    await screenshot(page, "review-returned-to-technician");
    await page.getByRole("link", { name: "Edit" }).first().click();
    await page.waitForURL(/\/lab\//);
    // The return comment is where the technician edits, too.
    await page.getByText(/came back from the owner’s engineer: “Second cycle looks light/).waitFor();
    await lab.fillCouponLosses([0.3021], 2);
    await lab.fillBlank(19.8, [19.7989, 19.7978]);
    await lab.saveToDraftSubmission();
    await page
      .getByLabel("Your reply to the engineer (optional)")
      .fill("Re-weighed the coupon and added the blank weighings.");
    await lab.submitSubmission(world.owner.name);
    await expect(page.getByText("revision 2").count()).resolves.toBe(1);
    await signOut(page);
  });

  it("engineer: sees what changed, approves; the approval e-mail reaches the submitter once", async () => {
    const { page } = browser;
    await signIn(page, app.url, world.engineer.email);
    const submissionId = submissionUrl.split("/").pop()!;
    await page.goto(`${app.url}/review/${submissionId}`);
    await page.getByText("What changed from revision 1 to 2").waitFor();
    await expect(page.getByRole("cell", { name: "blank mass before cleaning, g" }).count()).resolves.toBe(1);
    await page
      .getByTestId("contractor-reply")
      .getByText(/added the blank weighings/)
      .waitFor();
    // Approval asks for the confirmation that names what becomes permanent.
    await page.getByRole("button", { name: "Approve submission" }).click();
    await page.getByText(/Tick to confirm that these results become permanent/).waitFor();
    for (const reason of await page.getByLabel(/^Why approve coupon/).all())
      await reason.fill("Checked against the lab sheet; the weighings stand.");
    await page.getByLabel(/once approved they are permanent/).check();
    await page.getByRole("button", { name: "Approve submission" }).click();
    await page.getByText(/approved: its results are now part of the circuits/).waitFor();
    await screenshot(page, "review-approved");

    const inbox = process.env.FAKE_MAIL_URL!;
    const deadline = Date.now() + 30_000;
    let approvals: Array<{ subject: string }> = [];
    while (Date.now() < deadline) {
      const res = await fetch(`${inbox}/emails?to=${encodeURIComponent(world.tech.email)}`);
      const body = (await res.json()) as { data: Array<{ subject: string }> };
      approvals = body.data.filter((m) => m.subject.includes(reference) && /approved/i.test(m.subject));
      if (approvals.length > 0) break;
      await new Promise((r) => setTimeout(r, 500));
    }
    expect(approvals).toHaveLength(1);
    await page.goto(inbox);
    await screenshot(page, "review-approval-in-inbox");
  });
});
