import { createElement } from "react";
import { describe, expect, it } from "vitest";
import { severityBand } from "../../../app/domain/index.ts";
import { MemberInvitedEmail, memberInvitedSubject } from "../../../app/emails/member-invited";
import { OverdueReminderEmail, overdueReminderSubject } from "../../../app/emails/overdue-reminder";
import { CAUTION, gradeMeaning, SeriousResultEmail, seriousResultSubject } from "../../../app/emails/serious-result";
import { SubmissionReturnedEmail, submissionReturnedSubject } from "../../../app/emails/submission-decided";
import { renderEmail } from "../../../app/emails/render.server";
import { BelowRequiredEmail, belowRequiredSubject } from "../../../app/emails/below-required";

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

  it("sets the overdue table out in columns in the text, one site per reminder", async () => {
    const props = {
      recipientName: "",
      contractorName: "Monitoring Co",
      ownerName: "Owner One",
      siteName: "Plant A",
      day: "2026-12-01",
      pullsUrl: "https://wallcast.test/pulls",
      pulls: [{ pointTag: "CP-1", circuitTag: "C-10", couponSerial: "OVD-1", dueOn: "2026-11-20", daysOverdue: 11 }],
    };
    const m = await renderEmail(overdueReminderSubject(props), createElement(OverdueReminderEmail, props));
    expect(m.subject).toBe("1 coupon pull overdue at Plant A for Monitoring Co");
    expect(m.text).toMatch(/^Hello,\n/);
    expect(m.text).toContain("in service at Plant A (Owner One) longer than its point's planned exposure");
    expect(m.text).toContain("Point  Circuit  Coupon  Due on (site date)  Days overdue\n");
    expect(m.text).toContain("CP-1   C-10     OVD-1   2026-11-20          11\n");
    expect(m.text).toContain("as of 2026-12-01 at the site");
    expect(m.html).toContain("<th");
  });

  describe("the invitation", () => {
    const staff = {
      recipientName: "Ina Engineer",
      email: "ina@owner.example",
      invitedByName: "Ada Admin",
      ownerName: "Norvale Energy",
      roleLabel: "Integrity engineer",
      contractorName: null,
      signInUrl: "https://wallcast.test/auth/login?login_hint=ina%40owner.example",
    };

    it("says who invited them, where, as what, and how to sign in", async () => {
      const m = await renderEmail(memberInvitedSubject(staff), createElement(MemberInvitedEmail, staff));
      expect(m.subject).toBe("Ada Admin invited you to Norvale Energy in Wallcast");
      expect(m.text).toBe(
        [
          "Hello Ina Engineer,",
          "",
          "Ada Admin invited you to Norvale Energy in Wallcast as an integrity engineer.",
          "",
          "Wallcast is where Norvale Energy and its contractors exchange corrosion data.",
          "",
          "Sign in with this address, ina@owner.example; your first sign-in activates your account.",
          "",
          "Sign in to Wallcast: https://wallcast.test/auth/login?login_hint=ina%40owner.example",
          "",
          "-- ",
          "You receive this because Ada Admin, an administrator of Norvale Energy, invited this address to Wallcast. If you did not expect it, you can ignore this e-mail.",
          "",
        ].join("\n"),
      );
      expect(m.html).toContain('href="https://wallcast.test/auth/login?login_hint=ina%40owner.example"');
    });

    it("names the contractor and the owner that engaged it for a technician", async () => {
      const tech = {
        ...staff,
        recipientName: "Tam Tech",
        email: "tam@monitoring.example",
        roleLabel: "Contractor technician",
        contractorName: "Quillon Corrosion Services",
      };
      const m = await renderEmail(memberInvitedSubject(tech), createElement(MemberInvitedEmail, tech));
      expect(m.subject).toBe("Ada Admin of Norvale Energy invited you to Wallcast for Quillon Corrosion Services");
      expect(m.text).toContain(
        "Ada Admin of Norvale Energy invited you to Wallcast as a contractor technician of Quillon Corrosion Services, a contractor Norvale Energy has engaged.",
      );
      expect(m.text).toContain(
        "You will record work for Quillon Corrosion Services at the Norvale Energy sites its contracts cover.",
      );
      expect(m.text).toContain("Sign in with this address, tam@monitoring.example;");
    });
  });

  describe("a serious result", () => {
    const base = {
      recipientName: "Pat Manager",
      recipientRole: "plant_manager",
      units: "si" as const,
      reference: "BWR-SUB-00012",
      ownerName: "Norvale Energy",
      contractorName: "Quillon Corrosion Services",
      siteName: "Brackwater Refinery",
      siteCode: "BWR",
      decidedBy: "Erin Engineer of Norvale Energy",
      worstSeverity: "severe",
      results: [
        {
          circuitTag: "BWR-C-07",
          circuitName: "Crude overhead",
          pointTag: "BWR-CH-101",
          pointName: "AF-12, bottom of line",
          couponSerial: "Q-2231",
          generalMmY: 0.4412,
          pittingMmY: null,
          worst: "severe",
        },
      ],
      // NACE SP0775 general "severe": above 10 mpy = 0.254 mm/y (exact conversion, published edge)
      bands: [
        {
          ...severityBand("general", "severe"),
          basis: "NACE SP0775 bands, carbon steel",
        },
      ],
      reviewUrl: "https://wallcast.test/review/1",
    };

    it("names the site, circuit, point and coupon, the rate with units, what the grade means, then the caution", async () => {
      const m = await renderEmail(seriousResultSubject(base), createElement(SeriousResultEmail, base));
      expect(m.subject).toBe("Severe corrosion result approved: submission BWR-SUB-00012 at Brackwater Refinery");
      expect(m.text).toContain(
        "Submission BWR-SUB-00012 from Quillon Corrosion Services for Brackwater Refinery (BWR) was approved by Erin Engineer of Norvale Energy with a worst severity of severe.",
      );
      expect(m.text).toMatch(/Circuit\s+Point\s+Coupon\s+General rate\s+Pitting rate\s+Severity/);
      expect(m.text).toContain("BWR-C-07 (Crude overhead)");
      expect(m.text).toContain("BWR-CH-101 (AF-12, bottom of line)");
      expect(m.text).toContain("Q-2231");
      expect(m.text).toContain("0.441 mm/y");
      const meaning = "Severe means general corrosion above 0.254 mm/y (NACE SP0775 bands, carbon steel).";
      expect(m.text).toContain(meaning);
      expect(m.text).toContain(`CAUTION: ${CAUTION}`);
      // the meaning comes before the caution, which stays whole
      expect(m.text.indexOf(meaning)).toBeLessThan(m.text.indexOf(CAUTION));
      expect(m.html).toContain("Severe means general corrosion above 0.254 mm/y");
      expect(m.html).toContain("qualified engineer or authorised piping inspector");
    });

    it("says the bands in the reader's units and joins kinds and bases in one line", async () => {
      const us = {
        ...base,
        units: "us" as const,
        worstSeverity: "high",
        bands: [
          // SP0775 general "high": 5 to 10 mpy (published); pitting "high": 8 to 15 mpy (from memory)
          { ...severityBand("general", "high"), basis: "NACE SP0775 bands, carbon steel" },
          { ...severityBand("pitting", "high"), basis: "NACE SP0775 bands, carbon steel" },
          // owner thresholds for stainless steel, 0.05 | 0.1 | 0.2 mm/y: 0.1 mm/y = 3.937 mpy (exact ÷ 0.0254)
          {
            ...severityBand("general", "high", { moderate: 0.05, high: 0.1, severe: 0.2 }),
            basis: "owner thresholds, stainless steel",
          },
        ],
      };
      const m = await renderEmail(seriousResultSubject(us), createElement(SeriousResultEmail, us));
      expect(m.text.replace(/\s+/g, " ")).toContain(
        "High means general corrosion from 5 to 10 mpy or pitting from 8 to 15 mpy (NACE SP0775 bands, carbon steel); general corrosion from 3.937 to 7.874 mpy (owner thresholds, stainless steel).",
      );
      expect(m.text).toContain("17.37 mpy"); // 0.4412 mm/y ÷ 0.0254
      expect(m.text).toContain(`CAUTION: ${CAUTION}`);
      expect(gradeMeaning("high", [], "si")).toBeNull();
    });
  });

  it("says below required thickness in words, with the readings in the reader's units and the caution", async () => {
    const props = {
      recipientName: "Erin Engineer",
      units: "us" as const,
      ownerName: "Owner One",
      cause: "Survey PA-SUB-9 was approved",
      rows: [
        {
          siteName: "Plant A",
          circuitTag: "L-100",
          cmlTag: "L-100-3",
          lastThicknessMm: 2.54,
          lastMeasuredOn: "2026-05-01",
          requiredMm: 3.0075,
        },
      ],
      circuitsUrl: "https://wallcast.test/setup/sites/1",
    };
    const m = await renderEmail(belowRequiredSubject(props), createElement(BelowRequiredEmail, props));
    expect(m.subject).toBe("Below required thickness: 1 CML at Plant A");
    expect(m.text).toContain("fitness-for-service assessment or repair needed");
    // 2.54 mm ÷ 25.4 mm/in = 0.100 in (the inch is 25.4 mm exactly)
    expect(m.text).toContain("0.100 in on 2026-05-01");
    expect(m.text).toContain(CAUTION);
  });
});
