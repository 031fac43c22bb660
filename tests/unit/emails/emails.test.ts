import { createElement } from "react";
import { describe, expect, it } from "vitest";
import { OverdueReminderEmail, overdueReminderSubject } from "../../../app/emails/overdue-reminder";
import { SubmissionReturnedEmail, submissionReturnedSubject } from "../../../app/emails/submission-decided";
import { renderEmail } from "../../../app/emails/render.server";

const returned = {
  recipientName: "Tess Tech",
  reference: "PA-CP-7",
  revision: 2,
  ownerName: "Owner\r\nBcc: someone@example.test",
  contractorName: "Monitoring Co",
  siteName: "Plant A",
  decidedByName: "Erin Engineer",
  comment: 'Re-weigh <b>after</b> cleaning & check the "blank"\nsecond line',
  submissionUrl: "https://wallcast.test/submissions/1?a=1&b=2",
};

describe("e-mail components", () => {
  it("keeps the subject on one line when a name carries a line break", async () => {
    const m = await renderEmail(submissionReturnedSubject(returned), createElement(SubmissionReturnedEmail, returned));
    expect(m.subject).toBe("Submission PA-CP-7 returned by Owner Bcc: someone@example.test: changes requested");
    expect(m.subject).not.toMatch(/[\r\n]/);
    expect(m.html).toContain(
      "<title>Submission PA-CP-7 returned by Owner Bcc: someone@example.test: changes requested</title>",
    );
  });

  it("escapes what people typed in the HTML and keeps it as typed in the text", async () => {
    const m = await renderEmail(submissionReturnedSubject(returned), createElement(SubmissionReturnedEmail, returned));
    expect(m.html).toContain("Re-weigh &lt;b&gt;after&lt;/b&gt; cleaning &amp; check the &quot;blank&quot;");
    expect(m.html).not.toContain("<b>after</b>");
    expect(m.html).toContain('href="https://wallcast.test/submissions/1?a=1&amp;b=2"');
    expect(m.text).toBe(
      [
        "Hello Tess Tech,",
        "",
        "Erin Engineer of Owner Bcc: someone@example.test returned submission PA-CP-7 (revision 2) for Plant A.",
        "",
        "Correct the results the comment points to, then send the submission again; it comes back as the next revision.",
        "",
        "What to change:",
        "",
        '> Re-weigh <b>after</b> cleaning & check the "blank"',
        "> second line",
        "",
        "Open the submission: https://wallcast.test/submissions/1?a=1&b=2",
        "",
        "-- ",
        "You receive this because you sent this submission for Monitoring Co.",
        "",
      ].join("\n"),
    );
  });

  it("sets the overdue table out in columns in the text", async () => {
    const props = {
      recipientName: "",
      contractorName: "Monitoring Co",
      day: "2026-12-01",
      pullsUrl: "https://wallcast.test/pulls",
      pulls: [
        {
          ownerName: "Owner One",
          siteName: "Plant A",
          pointTag: "CP-1",
          circuitTag: "C-10",
          couponSerial: "OVD-1",
          dueOn: "2026-11-20",
          daysOverdue: 11,
        },
      ],
    };
    const m = await renderEmail(overdueReminderSubject(props), createElement(OverdueReminderEmail, props));
    expect(m.subject).toBe("1 coupon pull overdue for Monitoring Co");
    expect(m.text).toMatch(/^Hello,\n/);
    expect(m.text).toContain("Owner      Site     Point  Circuit  Coupon  Due on (site date)  Days overdue\n");
    expect(m.text).toContain("Owner One  Plant A  CP-1   C-10     OVD-1   2026-11-20          11\n");
    expect(m.html).toContain("<th");
  });
});
