import { CAUTION } from "../services/caution";
import {
  Caution,
  count,
  EmailLayout,
  Paragraph,
  revisionNote,
  submissionNoun,
  submissionTitle,
  surveyNote,
  type SubmissionKindFacts,
} from "./layout";

/** To each integrity engineer of the owner: a contractor sent a submission for review. */
export type SubmissionSubmittedProps = SubmissionKindFacts & {
  recipientName: string;
  reference: string;
  revision: number;
  contractorName: string;
  ownerName: string;
  siteName: string;
  resultCount: number;
  worstSeverity: string | null;
  flagCount: number;
  reviewUrl: string;
};

export const submissionSubmittedSubject = (p: SubmissionSubmittedProps) =>
  `${submissionTitle(p)} submitted by ${p.contractorName}`;

export function SubmissionSubmittedEmail(p: SubmissionSubmittedProps) {
  const facts = [
    p.kind === "thickness" ? null : count(p.resultCount, "coupon result"),
    p.worstSeverity ? `worst severity ${p.worstSeverity}` : null,
    p.flagCount > 0 ? `${count(p.flagCount, "quality flag")} to look at` : "no quality flags",
  ].filter(Boolean);
  return (
    <EmailLayout
      subject={submissionSubmittedSubject(p)}
      greeting={p.recipientName}
      action={{ label: "Review the submission", url: p.reviewUrl }}
      footer={`You receive this because you are an integrity engineer of ${p.ownerName} in Wallcast.`}
    >
      <Paragraph>
        {p.kind === "thickness"
          ? `${p.contractorName} submitted ${submissionNoun(p)}${revisionNote(p.revision)}${surveyNote(p)} for ${p.siteName}: ${facts.join(", ")}.`
          : `${p.contractorName} submitted ${p.reference}${revisionNote(p.revision)} for ${p.siteName}: ${facts.join(", ")}.`}
      </Paragraph>
      <Paragraph>It is waiting for an integrity engineer to approve it or return it with a comment.</Paragraph>
      {p.worstSeverity ? <Caution text={CAUTION} /> : null}
    </EmailLayout>
  );
}
