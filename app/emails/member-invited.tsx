import { EmailLayout, Paragraph } from "./layout";

/** To a person an owner's administrator invited: who, where, as what, and how to sign in. */
export type MemberInvitedProps = {
  recipientName: string;
  /** the address they were invited with, the one to sign in with */
  email: string;
  invitedByName: string;
  /** the owner whose administrator invited them */
  ownerName: string;
  /** "Integrity engineer", "Contractor technician"… */
  roleLabel: string;
  /** For a contractor technician: the contractor company they work for (engaged by the owner). */
  contractorName: string | null;
  signInUrl: string;
};

/** "an integrity engineer", "a plant manager". */
const withArticle = (label: string) => `${/^[aeiou]/i.test(label) ? "an" : "a"} ${label.toLowerCase()}`;

export const memberInvitedSubject = (p: MemberInvitedProps) =>
  p.contractorName
    ? `${p.invitedByName} of ${p.ownerName} invited you to Wallcast for ${p.contractorName}`
    : `${p.invitedByName} invited you to ${p.ownerName} in Wallcast`;

export function MemberInvitedEmail(p: MemberInvitedProps) {
  const role = withArticle(p.roleLabel);
  return (
    <EmailLayout
      subject={memberInvitedSubject(p)}
      greeting={p.recipientName}
      action={{ label: "Sign in to Wallcast", url: p.signInUrl }}
      footer={`You receive this because ${p.invitedByName}, an administrator of ${p.ownerName}, invited this address to Wallcast. If you did not expect it, you can ignore this e-mail.`}
    >
      <Paragraph>
        {p.contractorName
          ? `${p.invitedByName} of ${p.ownerName} invited you to Wallcast as ${role} of ${p.contractorName}, a contractor ${p.ownerName} has engaged.`
          : `${p.invitedByName} invited you to ${p.ownerName} in Wallcast as ${role}.`}
      </Paragraph>
      <Paragraph>
        {p.contractorName
          ? `You will record work for ${p.contractorName} at the ${p.ownerName} sites its contracts cover.`
          : `Wallcast is where ${p.ownerName} and its contractors exchange corrosion data.`}
      </Paragraph>
      <Paragraph>{`Sign in with this address, ${p.email}; your first sign-in activates your account.`}</Paragraph>
    </EmailLayout>
  );
}
