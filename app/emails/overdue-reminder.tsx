import { count, DataTable, EmailLayout, Paragraph } from "./layout";

export type OverduePullRow = {
  ownerName: string;
  siteName: string;
  pointTag: string;
  circuitTag: string;
  couponSerial: string;
  /** the due date at the site, YYYY-MM-DD */
  dueOn: string;
  daysOverdue: number;
};

/** The daily reminder to a contractor's technicians: coupons past their planned exposure. */
export type OverdueReminderProps = {
  recipientName: string;
  contractorName: string;
  /** the reminder's UTC date, YYYY-MM-DD */
  day: string;
  pulls: OverduePullRow[];
  pullsUrl: string;
};

export const overdueReminderSubject = (p: OverdueReminderProps) =>
  `${count(p.pulls.length, "coupon pull")} overdue for ${p.contractorName}`;

export function OverdueReminderEmail(p: OverdueReminderProps) {
  const one = p.pulls.length === 1;
  const owners = [...new Set(p.pulls.map((x) => x.ownerName))];
  return (
    <EmailLayout
      subject={overdueReminderSubject(p)}
      greeting={p.recipientName}
      action={{ label: "Open the pull schedule", url: p.pullsUrl }}
      footer={`You receive this daily reminder while ${p.contractorName} has overdue pulls in Wallcast (as of ${p.day}, UTC).`}
    >
      <Paragraph>
        {`${one ? "This coupon has" : "These coupons have"} been in service longer than ${one ? "its point's" : "their points'"} planned exposure, at sites your company's coupon-monitoring contracts with ${owners.join(", ")} cover. Pull ${one ? "it" : "them"} as soon as the plant allows, or tell the owner's engineer why not.`}
      </Paragraph>
      <DataTable
        head={["Owner", "Site", "Point", "Circuit", "Coupon", "Due on (site date)", "Days overdue"]}
        rows={p.pulls.map((x) => [
          x.ownerName,
          x.siteName,
          x.pointTag,
          x.circuitTag,
          x.couponSerial,
          x.dueOn,
          String(x.daysOverdue),
        ])}
      />
    </EmailLayout>
  );
}
