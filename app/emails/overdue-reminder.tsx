import { count, DataTable, EmailLayout, Paragraph } from "./layout";

export type OverduePullRow = {
  pointTag: string;
  circuitTag: string;
  couponSerial: string;
  /** the due date at the site, YYYY-MM-DD */
  dueOn: string;
  daysOverdue: number;
};

/**
 * The daily reminder to a contractor's technicians, one per site, sent in the morning of
 * the site's own day: coupons there past their planned exposure.
 */
export type OverdueReminderProps = {
  recipientName: string;
  contractorName: string;
  ownerName: string;
  siteName: string;
  /** the site's date of the reminder, YYYY-MM-DD */
  day: string;
  pulls: OverduePullRow[];
  pullsUrl: string;
};

export const overdueReminderSubject = (p: OverdueReminderProps) =>
  `${count(p.pulls.length, "coupon pull")} overdue at ${p.siteName} for ${p.contractorName}`;

export function OverdueReminderEmail(p: OverdueReminderProps) {
  const one = p.pulls.length === 1;
  return (
    <EmailLayout
      subject={overdueReminderSubject(p)}
      greeting={p.recipientName}
      action={{ label: "Open the pull schedule", url: p.pullsUrl }}
      footer={`You receive this reminder each morning, site time, while ${p.contractorName} has overdue pulls at ${p.siteName} in Wallcast (this one as of ${p.day} at the site).`}
    >
      <Paragraph>
        {`${one ? "This coupon has" : "These coupons have"} been in service at ${p.siteName} (${p.ownerName}) longer than ${one ? "its point's" : "their points'"} planned exposure. Pull ${one ? "it" : "them"} as soon as the plant allows, or tell the owner's engineer why not.`}
      </Paragraph>
      <DataTable
        head={["Point", "Circuit", "Coupon", "Due on (site date)", "Days overdue"]}
        rows={p.pulls.map((x) => [x.pointTag, x.circuitTag, x.couponSerial, x.dueOn, String(x.daysOverdue)])}
      />
    </EmailLayout>
  );
}
