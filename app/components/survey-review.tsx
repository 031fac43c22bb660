import { componentWord } from "~/services/cml-spec";
import type { RequiredThicknessView } from "~/services/circuit-views";
import type { Units } from "../context";
import { FlagList } from "./coupon-result";
import { formatSize } from "./attachment-dropzone";
import { Card, EngineeringCaution, Facts } from "./layout";
import { formatQuantity } from "./quantity";
import { Cell, TableHead } from "./table-head";

/**
 * The body of the review page for a thickness survey: the circuits it covers with their
 * required thickness, one card per CML (this reading, the CML's approved history, the
 * change and rate since the last reading, its flags), and the survey's files. The shapes
 * are those the review page's loader hands over.
 */

type Flag = { key: string; code: string; severity: "warning" | "info"; message: string };

type RequiredThickness = RequiredThicknessView;

export type SurveyCircuitView = {
  id: string;
  tag: string;
  service: string;
  materialName: string;
  pipingClass: number | null;
  requiredThickness: RequiredThickness;
};

export type SurveyReadingView = {
  id: string;
  cmlTag: string;
  location: string;
  component: string;
  injectionPoint: boolean;
  circuitId: string;
  circuitTag: string;
  measuredOn: string;
  thicknessMm: number;
  quadrantReadingsMm: number[];
  method: string;
  instrument: string;
  instrumentResolutionMm: number | null;
  technician: string;
  notes: string;
};

export type CmlHistoryView = {
  baseline: { on: string | null; thicknessMm: number | null };
  readings: Array<{ measuredOn: string; thicknessMm: number; reference: string }>;
  replacements: Array<{ replacedOn: string; baselineThicknessMm: number | null; reason: string }>;
};

export type ChangeView = {
  from: { on: string; thicknessMm: number; what: "reading" | "base-line" | "replacement" };
  changeMm: number;
  years: number;
  rateMmPerYear: number;
  grew: boolean;
};

export type SurveyFileView = {
  id: string;
  kind: "survey_sheet" | "survey_photo" | "instrument_export";
  contentType: string;
  byteSize: number;
  name: string;
  url: string;
  thumbnailUrl: string | null;
  uploadedBy: string;
};

const fileKindLabels: Record<SurveyFileView["kind"], string> = {
  survey_sheet: "Survey sheet",
  survey_photo: "Photo",
  instrument_export: "Instrument export (CSV)",
};

/** What governed a circuit's required thickness, in words (API 570: the greater of B31.3 eq. 3a and the structural minimum). */
export function requiredThicknessWords(view: RequiredThickness): string {
  if (view.status === "missing") return `Not yet known: missing ${view.missing.join(", ")}.`;
  if (view.status === "not-applicable") return view.message;
  if (view.governedBy === "pressure-design")
    return `Governed by pressure design, B31.3 eq. 3a (Y ${view.y}${view.yFromTable ? " from Table 304.1.1" : ""}); structural minimum ${view.structuralMinimumMm.toFixed(2)} mm.`;
  if (view.governedBy === "structural-minimum")
    return `Governed by the API 574 structural minimum for NPS ${view.nps}; pressure design ${view.pressureDesignMm.toFixed(3)} mm.`;
  return `Governed by the owner’s structural minimum (${view.ownerReason ?? "no reason given"}); pressure design ${view.pressureDesignMm.toFixed(3)} mm.`;
}

const signed = (mm: number, units: Units) =>
  (mm > 0 ? "+" : mm < 0 ? "−" : "±") + formatQuantity("thickness", Math.abs(mm), units);

export function SurveyBody({
  circuits,
  readings,
  histories,
  changes,
  flags,
  files,
  units,
}: {
  circuits: SurveyCircuitView[];
  readings: SurveyReadingView[];
  histories: Record<string, CmlHistoryView | undefined>;
  changes: Record<string, ChangeView | null>;
  flags: Record<string, Flag[]>;
  files: SurveyFileView[];
  units: Units;
}) {
  const required = new Map(circuits.map((c) => [c.id, c.requiredThickness]));
  const photos = files.filter((f) => f.kind === "survey_photo");
  const others = files.filter((f) => f.kind !== "survey_photo");
  return (
    <>
      <Card title="Circuits in this survey">
        {circuits.length === 0 ? (
          <p className="text-sm text-ink-soft">The survey names no circuits.</p>
        ) : (
          <div className="overflow-x-auto">
            <table className="stack-table min-w-full text-sm">
              <caption className="sr-only">Circuits and their required thickness</caption>
              <TableHead labels={["Circuit", "Service", "Material", "Class", "Required thickness", "Readings"]} />
              <tbody>
                {circuits.map((c) => (
                  <tr key={c.id} className="border-b border-rule last:border-0">
                    <Cell label="Circuit" className="font-medium">
                      {c.tag}
                    </Cell>
                    <Cell label="Service">{c.service || "—"}</Cell>
                    <Cell label="Material">{c.materialName}</Cell>
                    <Cell label="Class">{c.pipingClass ?? "—"}</Cell>
                    <Cell label="Required thickness">
                      <div className="min-w-48">
                        {c.requiredThickness.status === "ok" ? (
                          <div className="num font-medium">
                            {formatQuantity("thickness", c.requiredThickness.requiredMm, units)}
                          </div>
                        ) : null}
                        <div className="text-xs text-ink-soft">{requiredThicknessWords(c.requiredThickness)}</div>
                      </div>
                    </Cell>
                    <Cell label="Readings" className="num text-right">
                      {readings.filter((r) => r.circuitId === c.id).length}
                    </Cell>
                  </tr>
                ))}
              </tbody>
            </table>
          </div>
        )}
        <div className="mt-3">
          <EngineeringCaution compact />
        </div>
      </Card>

      {readings.map((r) => (
        <ReadingCard
          key={r.id}
          reading={r}
          required={required.get(r.circuitId)}
          history={histories[r.id]}
          change={changes[r.id] ?? null}
          flags={flags[r.id] ?? []}
          units={units}
        />
      ))}

      <Card title="Survey files">
        {files.length === 0 ? (
          <p className="text-sm text-ink-soft">No survey sheet, photos or instrument export were attached.</p>
        ) : (
          <div className="space-y-3">
            {photos.length ? (
              <ul className="grid grid-cols-[repeat(auto-fill,minmax(9rem,1fr))] gap-3" aria-label="Survey photos">
                {photos.map((f) => (
                  <li key={f.id} className="min-w-0" data-testid="survey-file">
                    <a
                      href={f.url}
                      target="_blank"
                      rel="noopener"
                      className="block overflow-hidden rounded-md border border-rule bg-paper no-underline hover:border-tide-300"
                      title={`Open ${f.name} (${formatSize(f.byteSize)}) in a new tab`}
                    >
                      {f.thumbnailUrl ? (
                        <img
                          src={f.thumbnailUrl}
                          alt={`Photo: ${f.name}`}
                          loading="lazy"
                          className="aspect-[4/3] w-full bg-tide-50 object-cover"
                        />
                      ) : (
                        <span className="flex aspect-[4/3] items-center justify-center text-xs">Open photo</span>
                      )}
                    </a>
                    <p className="truncate text-xs text-ink" title={f.name}>
                      {f.name}
                    </p>
                    <p className="truncate text-xs text-ink-faint">
                      {formatSize(f.byteSize)} · {f.uploadedBy}
                    </p>
                  </li>
                ))}
              </ul>
            ) : null}
            {others.length ? (
              <ul className="space-y-1 text-sm">
                {others.map((f) => (
                  <li key={f.id} data-testid="survey-file">
                    <span className="text-xs font-semibold uppercase tracking-wide text-ink-soft">
                      {fileKindLabels[f.kind]}
                    </span>{" "}
                    <a
                      href={f.url}
                      {...(f.kind === "instrument_export"
                        ? { download: f.name }
                        : { target: "_blank", rel: "noopener" })}
                    >
                      {f.kind === "instrument_export" ? `Download ${f.name}` : `Open ${f.name}`}
                    </a>{" "}
                    <span className="text-xs text-ink-faint">
                      {formatSize(f.byteSize)} · {f.uploadedBy}
                    </span>
                  </li>
                ))}
              </ul>
            ) : null}
          </div>
        )}
      </Card>
    </>
  );
}

function ReadingCard({
  reading: r,
  required,
  history,
  change,
  flags,
  units,
}: {
  reading: SurveyReadingView;
  required: RequiredThickness | undefined;
  history: CmlHistoryView | undefined;
  change: ChangeView | null;
  flags: Flag[];
  units: Units;
}) {
  const below = flags.some((f) => f.code === "below-required");
  const requiredMm = required?.status === "ok" ? required.requiredMm : null;
  return (
    <Card title={`${r.cmlTag} · ${r.circuitTag}`} className={below ? "border-l-4 border-l-bad" : ""}>
      {below ? (
        <div className="mb-3 space-y-2">
          <p
            className="rounded-md border border-bad px-3 py-2 text-sm font-semibold text-bad"
            data-testid="below-required"
          >
            <span aria-hidden="true">■ </span>
            At or below required thickness: {formatQuantity("thickness", r.thicknessMm, units)} measured
            {requiredMm !== null ? ` against ${formatQuantity("thickness", requiredMm, units)} required` : ""}.
          </p>
          <EngineeringCaution compact />
        </div>
      ) : null}
      <div className="grid gap-6 lg:grid-cols-2">
        <div>
          <h3 className="mb-2 text-sm font-semibold">This reading</h3>
          <Facts
            items={[
              ["CML", `${r.cmlTag} — ${componentWord(r.component)}${r.location ? `, ${r.location}` : ""}`],
              ["Injection point", r.injectionPoint ? "yes" : "no"],
              ["Measured on", r.measuredOn],
              ["Thickness", formatQuantity("thickness", r.thicknessMm, units)],
              [
                "Quadrant readings",
                r.quadrantReadingsMm.length
                  ? r.quadrantReadingsMm.map((q) => formatQuantity("thickness", q, units)).join(" · ")
                  : "one reading only",
              ],
              ["Method", r.method],
              [
                "Instrument",
                `${r.instrument || "not recorded"}${r.instrumentResolutionMm !== null ? `, resolves ${formatQuantity("thickness", r.instrumentResolutionMm, units)}` : ", resolution not recorded"}`,
              ],
              ["Technician", r.technician || "not recorded"],
              ["Notes", r.notes || "—"],
              [
                "Required thickness",
                requiredMm !== null
                  ? formatQuantity("thickness", requiredMm, units)
                  : required
                    ? requiredThicknessWords(required)
                    : "—",
              ],
            ]}
          />
        </div>
        <div>
          <h3 className="mb-2 text-sm font-semibold">Since the last reading</h3>
          {change ? (
            <Facts
              items={[
                [
                  "Compared with",
                  `${change.from.what === "reading" ? "approved reading" : change.from.what === "base-line" ? "base-line" : "new component’s base-line"} of ${change.from.on}, ${formatQuantity("thickness", change.from.thicknessMm, units)}`,
                ],
                ["Change", `${signed(change.changeMm, units)} over ${change.years.toFixed(2)} years`],
                [
                  "Implied rate",
                  change.grew
                    ? `${formatQuantity("rate", 0, units)} — the wall reads thicker; growth is never used as a negative rate`
                    : formatQuantity("rate", change.rateMmPerYear, units),
                ],
              ]}
            />
          ) : (
            <p className="text-sm text-ink-soft">
              No earlier approved reading or base-line to compare with: this reading starts the CML’s history.
            </p>
          )}
          {flags.length ? (
            <div className="mt-3">
              <h4 className="text-sm font-semibold">Quality flags</h4>
              <FlagList flags={flags} />
            </div>
          ) : (
            <p className="mt-3 text-sm text-ink-soft">No quality flags.</p>
          )}
        </div>
        <div className="lg:col-span-2">
          <h3 className="mb-2 text-sm font-semibold">Approved history at {r.cmlTag}</h3>
          <HistoryList history={history} units={units} />
        </div>
      </div>
    </Card>
  );
}

function HistoryList({ history, units }: { history: CmlHistoryView | undefined; units: Units }) {
  if (!history) return <p className="text-sm text-ink-soft">No history.</p>;
  type Row = { on: string; what: string; thickness: number | null };
  const rows: Row[] = [
    ...(history.baseline.on || history.baseline.thicknessMm !== null
      ? [{ on: history.baseline.on ?? "", what: "Base-line", thickness: history.baseline.thicknessMm }]
      : []),
    ...history.readings.map((h) => ({ on: h.measuredOn, what: `Reading, ${h.reference}`, thickness: h.thicknessMm })),
    ...history.replacements.map((x) => ({
      on: x.replacedOn,
      what: `Component replaced: ${x.reason}`,
      thickness: x.baselineThicknessMm,
    })),
  ].sort((a, b) => a.on.localeCompare(b.on));
  if (rows.length === 0)
    return <p className="text-sm text-ink-soft">No approved reading and no base-line recorded yet.</p>;
  return (
    <table className="stack-table min-w-full text-sm">
      <caption className="sr-only">Approved history</caption>
      <TableHead labels={["Date", "What", "Thickness"]} />
      <tbody>
        {rows.map((row, i) => (
          <tr key={i} className="border-b border-rule last:border-0">
            <Cell label="Date" className="num">
              {row.on || "date not recorded"}
            </Cell>
            <Cell label="What">{row.what}</Cell>
            <Cell label="Thickness" className="num">
              {row.thickness === null
                ? "nominal less mill tolerance"
                : formatQuantity("thickness", row.thickness, units)}
            </Cell>
          </tr>
        ))}
      </tbody>
    </table>
  );
}
