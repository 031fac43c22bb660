import { mmPerYearToMpy, type SeverityBand } from "../domain/index.ts";
import { Caution, DataTable, EmailLayout, Paragraph } from "./layout";

/** Carried by every message whose numbers can drive a decision about a line. */
import { CAUTION } from "../services/caution";

export { CAUTION };

export type SeriousResultRow = {
  circuitTag: string;
  /** the circuit's description ("" when it has none) */
  circuitName: string;
  pointTag: string;
  /** where the point is: its access fitting and orientation ("" when neither is set) */
  pointName: string;
  couponSerial: string;
  generalMmY: number;
  pittingMmY: number | null;
  worst: string;
};

/** What the worst grade means: one band per rate kind and basis that reached it. */
export type SeriousBand = SeverityBand & {
  /** what it was graded against: "NACE SP0775 bands, carbon steel", "owner thresholds, stainless steel" */
  basis: string;
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
  siteCode: string;
  /** "Ann Lee of Owner One" */
  decidedBy: string;
  /** "high" or "severe" */
  worstSeverity: string;
  results: SeriousResultRow[];
  /** the bands of the worst grade (empty when the stored results do not say what they were graded against) */
  bands: SeriousBand[];
  reviewUrl: string;
};

const capitalise = (s: string) => s.charAt(0).toUpperCase() + s.slice(1);

/** "C-1 (crude overhead)", or the tag alone. */
const tagged = (tag: string, name: string) => (name.trim() ? `${tag} (${name.trim()})` : tag);

export const seriousResultSubject = (p: SeriousResultProps) =>
  `${capitalise(p.worstSeverity)} corrosion result approved: submission ${p.reference} at ${p.siteName}`;

/** Four significant figures at most, so exact conversions read as the edges they are (0.254, 10). */
const edge = (mmY: number, units: "si" | "us") => {
  const value = units === "us" ? mmPerYearToMpy(mmY) : mmY;
  return String(Number(value.toPrecision(4)));
};

/** "general corrosion above 0.254 mm/y", "pitting from 0.2032 to 0.381 mm/y". */
function bandWords(b: SeverityBand, units: "si" | "us"): string {
  const unit = units === "us" ? "mpy" : "mm/y";
  const what = b.kind === "general" ? "general corrosion" : "pitting";
  if (b.lower !== null && b.upper !== null) {
    const upper = b.upperIncluded ? `${edge(b.upper, units)} ${unit}` : `below ${edge(b.upper, units)} ${unit}`;
    return `${what} from ${edge(b.lower, units)} to ${upper}`;
  }
  if (b.lower !== null) return `${what} ${b.lowerIncluded ? "from" : "above"} ${edge(b.lower, units)} ${unit}`;
  if (b.upper !== null) return `${what} below ${edge(b.upper, units)} ${unit}`;
  return what;
}

/**
 * "Severe means general corrosion above 0.254 mm/y (NACE SP0775 bands, carbon steel)." —
 * bands of one basis joined by "or", bases by "; ".
 */
export function gradeMeaning(worst: string, bands: SeriousBand[], units: "si" | "us"): string | null {
  if (bands.length === 0) return null;
  const byBasis = new Map<string, string[]>();
  for (const b of bands) {
    const words = bandWords(b, units);
    const list = byBasis.get(b.basis) ?? [];
    if (!list.includes(words)) list.push(words);
    byBasis.set(b.basis, list);
  }
  const parts = [...byBasis].map(([basis, words]) => `${words.join(" or ")} (${basis})`);
  return `${capitalise(worst)} means ${parts.join("; ")}.`;
}

export function SeriousResultEmail(p: SeriousResultProps) {
  const rate = (mmY: number | null) =>
    mmY === null || !Number.isFinite(mmY)
      ? "—"
      : p.units === "us"
        ? `${mmPerYearToMpy(mmY).toFixed(2)} mpy`
        : `${mmY.toFixed(3)} mm/y`;
  const role = p.recipientRole === "plant_manager" ? "a plant manager" : "an integrity engineer";
  const meaning = gradeMeaning(p.worstSeverity, p.bands, p.units);
  return (
    <EmailLayout
      subject={seriousResultSubject(p)}
      greeting={p.recipientName}
      action={{ label: "Open the review", url: p.reviewUrl }}
      footer={`You receive this because you are ${role} of ${p.ownerName} in Wallcast; both hear of every high or severe result approved.`}
    >
      <Paragraph>
        {`Submission ${p.reference} from ${p.contractorName} for ${p.siteName} (${p.siteCode}) was approved by ${p.decidedBy} with a worst severity of ${p.worstSeverity}.`}
      </Paragraph>
      <Paragraph>
        {p.results.length
          ? "The results at high or severe:"
          : "Open the submission to see which results drive the severity."}
      </Paragraph>
      {p.results.length ? (
        <DataTable
          head={["Circuit", "Point", "Coupon", "General rate", "Pitting rate", "Severity"]}
          rows={p.results.map((x) => [
            tagged(x.circuitTag, x.circuitName),
            tagged(x.pointTag, x.pointName),
            x.couponSerial,
            rate(x.generalMmY),
            rate(x.pittingMmY),
            x.worst,
          ])}
        />
      ) : null}
      {meaning ? <Paragraph>{meaning}</Paragraph> : null}
      <Caution text={CAUTION} />
    </EmailLayout>
  );
}
