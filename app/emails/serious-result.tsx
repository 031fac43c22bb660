import { mmPerYearToMpy } from "../domain/index.ts";
import { Caution, DataTable, EmailLayout, Paragraph } from "./layout";

/** Carried by every message whose numbers can drive a decision about a line. */
import { CAUTION } from "../services/caution";

export { CAUTION };

export type SeriousResultRow = {
  pointTag: string;
  couponSerial: string;
  generalMmY: number;
  pittingMmY: number | null;
  worst: string;
};

/** To the owner's integrity engineers and plant managers: a high or severe result was approved. */
export type SeriousResultProps = {
  recipientName: string;
  recipientRole: string;
  units: "si" | "us";
  reference: string;
  ownerName: string;
  contractorName: string;
  siteName: string;
  /** "Ann Lee of Owner One" */
  decidedBy: string;
  /** "high" or "severe" */
  worstSeverity: string;
  results: SeriousResultRow[];
  reviewUrl: string;
};

const capitalise = (s: string) => s.charAt(0).toUpperCase() + s.slice(1);

export const seriousResultSubject = (p: SeriousResultProps) =>
  `${capitalise(p.worstSeverity)} corrosion result approved: submission ${p.reference} at ${p.siteName}`;

export function SeriousResultEmail(p: SeriousResultProps) {
  const rate = (mmY: number | null) =>
    mmY === null || !Number.isFinite(mmY)
      ? "—"
      : p.units === "us"
        ? `${mmPerYearToMpy(mmY).toFixed(2)} mpy`
        : `${mmY.toFixed(3)} mm/y`;
  const role = p.recipientRole === "plant_manager" ? "a plant manager" : "an integrity engineer";
  return (
    <EmailLayout
      subject={seriousResultSubject(p)}
      greeting={p.recipientName}
      action={{ label: "Open the review", url: p.reviewUrl }}
      footer={`You receive this because you are ${role} of ${p.ownerName} in Wallcast; both hear of every high or severe result approved.`}
    >
      <Paragraph>
        {`Submission ${p.reference} from ${p.contractorName} was approved by ${p.decidedBy} with a worst severity of ${p.worstSeverity}.`}
      </Paragraph>
      <Paragraph>
        {p.results.length
          ? "The results at high or severe:"
          : "Open the submission to see which results drive the severity."}
      </Paragraph>
      {p.results.length ? (
        <DataTable
          head={["Point", "Coupon", "General rate", "Pitting rate", "Severity"]}
          rows={p.results.map((x) => [x.pointTag, x.couponSerial, rate(x.generalMmY), rate(x.pittingMmY), x.worst])}
        />
      ) : null}
      <Caution text={CAUTION} />
    </EmailLayout>
  );
}
