import { BELOW_REQUIRED_WORDS, mmToInch } from "../domain/index.ts";
import { Caution, DataTable, EmailLayout, Paragraph, count } from "./layout";
import { CAUTION } from "../services/caution";

/** One CML that reached its required thickness with this computation. */
export type BelowRequiredRow = {
  siteName: string;
  circuitTag: string;
  cmlTag: string;
  /** the last approved reading, mm, and its date */
  lastThicknessMm: number;
  lastMeasuredOn: string;
  requiredMm: number;
};

/** To the owner's integrity engineers: an approval put CMLs at or below their required thickness. */
export type BelowRequiredProps = {
  recipientName: string;
  units: "si" | "us";
  ownerName: string;
  /** "submission PA-SUB-12 was approved" or "a recompute ran" */
  cause: string;
  rows: BelowRequiredRow[];
  circuitsUrl: string;
};

export const belowRequiredSubject = (p: BelowRequiredProps) =>
  `Below required thickness: ${count(p.rows.length, "CML")} at ${[...new Set(p.rows.map((r) => r.siteName))].join(", ")}`;

export function BelowRequiredEmail(p: BelowRequiredProps) {
  const wall = (mm: number) => (p.units === "us" ? `${mmToInch(mm).toFixed(3)} in` : `${mm.toFixed(2)} mm`);
  return (
    <EmailLayout
      subject={belowRequiredSubject(p)}
      greeting={p.recipientName}
      action={{ label: "Open the site's circuits", url: p.circuitsUrl }}
      footer={`You receive this because you are an integrity engineer of ${p.ownerName} in Wallcast; every engineer hears at once when a CML reaches its required thickness.`}
    >
      <Paragraph>{`${p.cause}; with it, ${count(p.rows.length, "CML")} now read at or below the required thickness.`}</Paragraph>
      <Paragraph>{BELOW_REQUIRED_WORDS}</Paragraph>
      <DataTable
        head={["Site", "Circuit", "CML", "Last reading", "Required"]}
        rows={p.rows.map((r) => [
          r.siteName,
          r.circuitTag,
          r.cmlTag,
          `${wall(r.lastThicknessMm)} on ${r.lastMeasuredOn}`,
          wall(r.requiredMm),
        ])}
      />
      <Caution text={CAUTION} />
    </EmailLayout>
  );
}
