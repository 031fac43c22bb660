import { EmailLayout, Paragraph, Quote, revisionNote } from "./layout";

/** To the technician who submitted a packet: it was approved, or returned with a comment. */
export type PacketDecidedProps = {
  recipientName: string;
  reference: string;
  revision: number;
  ownerName: string;
  contractorName: string;
  siteName: string;
  decidedByName: string | null;
  comment: string | null;
  packetUrl: string;
};

/** "Ann Lee of Owner One", or the owner alone when the engineer is unknown. */
export const decidedBy = (p: { decidedByName: string | null; ownerName: string }) =>
  p.decidedByName ? `${p.decidedByName} of ${p.ownerName}` : p.ownerName;

const footer = (p: PacketDecidedProps) => `You receive this because you submitted this packet for ${p.contractorName}.`;

export const packetApprovedSubject = (p: PacketDecidedProps) => `Packet ${p.reference} approved by ${p.ownerName}`;

export function PacketApprovedEmail(p: PacketDecidedProps) {
  return (
    <EmailLayout
      subject={packetApprovedSubject(p)}
      greeting={p.recipientName}
      action={{ label: "Open the packet", url: p.packetUrl }}
      footer={footer(p)}
    >
      <Paragraph>
        {`${decidedBy(p)} approved packet ${p.reference}${revisionNote(p.revision)} for ${p.siteName}. Its results are now part of the owner's record.`}
      </Paragraph>
      {p.comment ? <Quote label="Comment" text={p.comment} /> : null}
    </EmailLayout>
  );
}

export const packetReturnedSubject = (p: PacketDecidedProps) =>
  `Packet ${p.reference} returned by ${p.ownerName}: changes requested`;

export function PacketReturnedEmail(p: PacketDecidedProps) {
  return (
    <EmailLayout
      subject={packetReturnedSubject(p)}
      greeting={p.recipientName}
      action={{ label: "Open the packet", url: p.packetUrl }}
      footer={footer(p)}
    >
      <Paragraph>{`${decidedBy(p)} returned packet ${p.reference}${revisionNote(p.revision)} for ${p.siteName}.`}</Paragraph>
      <Paragraph>
        Correct the results the comment points to, then submit the packet again; it comes back as the next revision.
      </Paragraph>
      {p.comment ? <Quote label="What to change" text={p.comment} /> : null}
    </EmailLayout>
  );
}
