import { EmailLayout, Paragraph, Quote } from "./layout";
import type { SubmissionDecidedProps } from "./submission-decided";

/** To whoever sent an approved submission that the owner reopened as a correction. */
export type CorrectionOpenedProps = Omit<SubmissionDecidedProps, "decidedByName" | "comment"> & {
  reason: string | null;
};

export const correctionOpenedSubject = (p: CorrectionOpenedProps) =>
  `Submission ${p.reference} reopened for correction by ${p.ownerName}`;

export function CorrectionOpenedEmail(p: CorrectionOpenedProps) {
  return (
    <EmailLayout
      subject={correctionOpenedSubject(p)}
      greeting={p.recipientName}
      action={{ label: "Open the correction", url: p.submissionUrl }}
      footer={`You receive this because you sent this submission for ${p.contractorName}.`}
    >
      <Paragraph>
        {`${p.ownerName} reopened approved submission ${p.reference} for ${p.siteName} as a correction (revision ${p.revision}).`}
      </Paragraph>
      <Paragraph>
        Edit the results the reason points to and submit the correction; the approved submission stays in force until
        the correction is approved.
      </Paragraph>
      {p.reason ? <Quote label="Reason" text={p.reason} /> : null}
    </EmailLayout>
  );
}
