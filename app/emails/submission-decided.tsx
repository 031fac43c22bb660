import {
  EmailLayout,
  Paragraph,
  Quote,
  revisionNote,
  submissionNoun,
  submissionTitle,
  surveyNote,
  type SubmissionKindFacts,
} from "./layout";

/** To the technician who sent a submission: it was approved, or returned with a comment. */
export type SubmissionDecidedProps = SubmissionKindFacts & {
  /** A survey's readings (not shown for coupon results). */
  resultCount?: number;
  recipientName: string;
  reference: string;
  revision: number;
  ownerName: string;
  contractorName: string;
  siteName: string;
  decidedByName: string | null;
  comment: string | null;
  submissionUrl: string;
};

/** "Ann Lee of Owner One", or the owner alone when the engineer is unknown. */
export const decidedBy = (p: { decidedByName: string | null; ownerName: string }) =>
  p.decidedByName ? `${p.decidedByName} of ${p.ownerName}` : p.ownerName;

const footer = (p: SubmissionDecidedProps) =>
  `You receive this because you sent this ${p.kind === "thickness" ? "survey" : "submission"} for ${p.contractorName}.`;

export const submissionApprovedSubject = (p: SubmissionDecidedProps) =>
  `${submissionTitle(p)} approved by ${p.ownerName}`;

export function SubmissionApprovedEmail(p: SubmissionDecidedProps) {
  return (
    <EmailLayout
      subject={submissionApprovedSubject(p)}
      greeting={p.recipientName}
      action={{ label: p.kind === "thickness" ? "Open the survey" : "Open the submission", url: p.submissionUrl }}
      footer={footer(p)}
    >
      <Paragraph>
        {p.kind === "thickness"
          ? `${decidedBy(p)} approved ${submissionNoun(p)}${revisionNote(p.revision)}${surveyNote(p)} for ${p.siteName}. Its readings are now part of the owner's record.`
          : `${decidedBy(p)} approved submission ${p.reference}${revisionNote(p.revision)} for ${p.siteName}. Its results are now part of the owner's record.`}
      </Paragraph>
      {p.comment ? <Quote label="Comment" text={p.comment} /> : null}
    </EmailLayout>
  );
}

export const submissionReturnedSubject = (p: SubmissionDecidedProps) =>
  `${submissionTitle(p)} returned by ${p.ownerName}: changes requested`;

export function SubmissionReturnedEmail(p: SubmissionDecidedProps) {
  return (
    <EmailLayout
      subject={submissionReturnedSubject(p)}
      greeting={p.recipientName}
      action={{ label: p.kind === "thickness" ? "Open the survey" : "Open the submission", url: p.submissionUrl }}
      footer={footer(p)}
    >
      <Paragraph>
        {p.kind === "thickness"
          ? `${decidedBy(p)} returned ${submissionNoun(p)}${revisionNote(p.revision)}${surveyNote(p)} for ${p.siteName}.`
          : `${decidedBy(p)} returned submission ${p.reference}${revisionNote(p.revision)} for ${p.siteName}.`}
      </Paragraph>
      <Paragraph>
        {p.kind === "thickness"
          ? "Correct the readings the comment points to, then send the survey again; it comes back as the next revision."
          : "Correct the results the comment points to, then send the submission again; it comes back as the next revision."}
      </Paragraph>
      {p.comment ? <Quote label="What to change" text={p.comment} /> : null}
    </EmailLayout>
  );
}
