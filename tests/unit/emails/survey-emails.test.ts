import { createElement } from "react";
import { describe, expect, it } from "vitest";
import { CorrectionOpenedEmail, correctionOpenedSubject } from "../../../app/emails/correction-opened";
import {
  SubmissionApprovedEmail,
  submissionApprovedSubject,
  SubmissionReturnedEmail,
  submissionReturnedSubject,
} from "../../../app/emails/submission-decided";
import { SubmissionSubmittedEmail, submissionSubmittedSubject } from "../../../app/emails/submission-submitted";
import { renderEmail } from "../../../app/emails/render.server";

const decided = {
  recipientName: "Ian Inspector",
  reference: "BRK-SUB-00012",
  revision: 1,
  ownerName: "Owner One",
  contractorName: "Inspection Co",
  siteName: "Brookmere Refinery",
  decidedByName: "Erin Engineer",
  comment: null,
  submissionUrl: "https://wallcast.test/submissions/1",
};
const survey = { kind: "thickness" as const, circuitTags: ["CR-101", "CR-102"], resultCount: 14 };

describe("e-mails about a thickness survey", () => {
  it("says what was submitted: the survey, its readings and circuits", async () => {
    const props = {
      recipientName: "Erin Engineer",
      reference: "BRK-SUB-00012",
      revision: 2,
      contractorName: "Inspection Co",
      ownerName: "Owner One",
      siteName: "Brookmere Refinery",
      resultCount: 14,
      worstSeverity: null,
      flagCount: 1,
      reviewUrl: "https://wallcast.test/review/1",
      kind: "thickness" as const,
      circuitTags: ["CR-101", "CR-102"],
    };
    const m = await renderEmail(submissionSubmittedSubject(props), createElement(SubmissionSubmittedEmail, props));
    expect(m.subject).toBe("Thickness survey BRK-SUB-00012 submitted by Inspection Co");
    expect(m.text).toContain(
      "Inspection Co submitted thickness survey BRK-SUB-00012 (revision 2) — 14 readings on circuits CR-101, CR-102 for Brookmere Refinery: 1 quality flag to look at.",
    );
    expect(m.text).not.toContain("coupon");
  });

  it("says approved and returned in survey words, and opens the survey", async () => {
    const approved = { ...decided, ...survey };
    const a = await renderEmail(submissionApprovedSubject(approved), createElement(SubmissionApprovedEmail, approved));
    expect(a.subject).toBe("Thickness survey BRK-SUB-00012 approved by Owner One");
    expect(a.text).toContain(
      "Erin Engineer of Owner One approved thickness survey BRK-SUB-00012 — 14 readings on circuits CR-101, CR-102 for Brookmere Refinery. Its readings are now part of the owner's record.",
    );
    expect(a.text).toContain("Open the survey: https://wallcast.test/submissions/1");
    expect(a.text).toContain("You receive this because you sent this survey for Inspection Co.");
    const returned = { ...decided, ...survey, comment: "Re-read CR-101-07 at 6 o'clock." };
    const r = await renderEmail(submissionReturnedSubject(returned), createElement(SubmissionReturnedEmail, returned));
    expect(r.subject).toBe("Thickness survey BRK-SUB-00012 returned by Owner One: changes requested");
    expect(r.text).toContain("Correct the readings the comment points to, then send the survey again");
  });

  it("says a correction was opened on the approved survey", async () => {
    const props = { ...decided, ...survey, revision: 2, reason: "CR-102-03 read on the wrong elbow" };
    const m = await renderEmail(correctionOpenedSubject(props), createElement(CorrectionOpenedEmail, props));
    expect(m.subject).toBe("Thickness survey BRK-SUB-00012 reopened for correction by Owner One");
    expect(m.text).toContain(
      "Owner One reopened approved thickness survey BRK-SUB-00012 — 14 readings on circuits CR-101, CR-102 for Brookmere Refinery as a correction (revision 2).",
    );
  });

  it("keeps the coupon wording when the kind is coupon", async () => {
    const coupon = { ...decided, kind: "coupon" as const, circuitTags: [], resultCount: 3 };
    const m = await renderEmail(submissionApprovedSubject(coupon), createElement(SubmissionApprovedEmail, coupon));
    expect(m.subject).toBe("Submission BRK-SUB-00012 approved by Owner One");
    expect(m.text).toContain(
      "Erin Engineer of Owner One approved submission BRK-SUB-00012 for Brookmere Refinery. Its results are now part of the owner's record.",
    );
    expect(m.text).toContain("Open the submission: https://wallcast.test/submissions/1");
  });
});
