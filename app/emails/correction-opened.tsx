import { EmailLayout, Paragraph, Quote, submissionNoun, submissionTitle, surveyNote } from "./layout";
import type { SubmissionDecidedProps } from "./submission-decided";

/** To whoever sent an approved submission that the owner reopened as a correction. */
export type CorrectionOpenedProps = Omit<SubmissionDecidedProps, "decidedByName" | "comment"> & {
  reason: string | null;
};

export const correctionOpenedSubject = (p: CorrectionOpenedProps) =>
  `${submissionTitle(p)} reopened for correction by ${p.ownerName}`;

export function CorrectionOpenedEmail(p: CorrectionOpenedProps) {
  return (
    <EmailLayout
      subject={correctionOpenedSubject(p)}
      greeting={p.recipientName}
      action={{ label: "Open the correction", url: p.submissionUrl }}
      footer={`You receive this because you sent this ${p.kind === "thickness" ? "survey" : "submission"} for ${p.contractorName}.`}
    >
      <Paragraph>
        {p.kind === "thickness"
          ? `${p.ownerName} reopened approved ${submissionNoun(p)}${surveyNote(p)} for ${p.siteName} as a correction (revision ${p.revision}).`
          : `${p.ownerName} reopened approved submission ${p.reference} for ${p.siteName} as a correction (revision ${p.revision}).`}
      </Paragraph>
      <Paragraph>
        {p.kind === "thickness"
          ? "Edit the readings the reason points to and submit the correction; the approved survey stays in force until the correction is approved."
          : "Edit the results the reason points to and submit the correction; the approved submission stays in force until the correction is approved."}
      </Paragraph>
      {p.reason ? <Quote label="Reason" text={p.reason} /> : null}
    </EmailLayout>
  );
}
