import { componentWord } from "~/services/cml-spec";
import { useMemo, useState } from "react";
import { Form, Link, useNavigation } from "react-router";
import { StatusBadge } from "~/components/badges";
import { Button, ButtonLink } from "~/components/button";
import { FlagList } from "~/components/coupon-result";
import { FormAlert, TextAreaField } from "~/components/field";
import { formFailure } from "~/components/form-failure";
import { Card, EngineeringCaution, Facts, PageHeader } from "~/components/layout";
import { formatQuantity } from "~/components/quantity";
import { SurveyAttachments } from "~/components/survey-attachments";
import { surveyReadingFlags, type QualityFlag } from "~/domain/index.ts";
import { listSurveyAttachments } from "~/models/attachments.server";
import { submitForReview } from "~/models/submissions.server";
import { getSurvey, saveSurveyReadings, type SurveyCml } from "~/models/thickness-surveys.server";
import { db } from "~/services/db.server";
import { redirectWithFlash } from "~/services/flash.server";
import { requireCapability, requireUuid } from "~/services/guards.server";
import { requestIdOf } from "~/services/problem.server";
import { Invalid } from "~/services/outcome";
import { formAction, intentOf, pageLoad, readForm } from "~/services/respond.server";
import {
  emptySurveyRow,
  parseSurveyRow,
  READING_FIELDS,
  SURVEY_METHODS,
  surveyFieldName,
  surveyMethodLabels,
  surveyRowsOfForm,
  type SurveyRowField,
  type SurveyRowText,
} from "~/services/survey-spec";
import { formatLocal } from "~/services/time";
import type { Route } from "./+types/surveys.$submissionId";

// The grid, its live flags and the server judge a row the same way (services/survey-spec.ts
// parseSurveyRow, then surveyReadingFlags from the calculation library), as the CSV import does.

async function load(args: Route.LoaderArgs | Route.ActionArgs) {
  const user = requireCapability(args, "recordWork");
  const id = requireUuid(args.params.submissionId);
  return { user, survey: await pageLoad(() => getSurvey(db(), user, id)) };
}

export async function loader(args: Route.LoaderArgs) {
  const { user, survey } = await load(args);
  const attachments = await listSurveyAttachments(db(), user, survey);
  return { survey, units: user.units, attachments };
}

export async function action(args: Route.ActionArgs) {
  const { user, survey } = await load(args);
  const values = await readForm(args.request);
  const intent = intentOf(values, ["saveReadings", "submit"] as const);
  const requestId = requestIdOf(args.context);
  return formAction(values, async () => {
    if (intent === "submit") {
      const r = await submitForReview(db(), user, survey.id, requestId, values.reply ?? "");
      return redirectWithFlash(`/surveys/${survey.id}`, {
        tone: "ok",
        message: `Survey ${r.reference} submitted to ${survey.ownerName}. Their integrity engineer will review it.`,
      });
    }
    const rows = surveyRowsOfForm(values);
    if (rows.size === 0)
      throw new Invalid({ form: "The form sent no readings; reload the page and enter them again." });
    const r = await saveSurveyReadings(db(), user, survey.id, rows, requestId);
    const parts = [
      r.saved ? `${r.saved} reading${r.saved === 1 ? "" : "s"} saved` : null,
      r.cleared ? `${r.cleared} cleared` : null,
      r.unchanged ? `${r.unchanged} unchanged` : null,
    ].filter(Boolean);
    return redirectWithFlash(`/surveys/${survey.id}`, {
      tone: "ok",
      message: parts.length ? `${parts.join(", ")}.` : "Nothing to save: every row is blank.",
    });
  });
}

// ------------------------------------------------------------------ component

type RowState = Record<string, SurveyRowText>;

/** The grid's rows as the form would send them: typed values after a refused save, else what is saved. */
function startingRows(cmls: SurveyCml[], values: Record<string, string> | undefined, siteToday: string): RowState {
  const sent = values ? surveyRowsOfForm(values) : new Map<string, SurveyRowText>();
  return Object.fromEntries(
    cmls.map((m) => {
      const row = sent.get(m.id) ?? m.saved ?? emptySurveyRow(siteToday);
      const readings = [...row.readings];
      while (readings.length < READING_FIELDS) readings.push("");
      return [m.id, { ...row, readings, method: row.method || "UT" }];
    }),
  );
}

type Live = { flags: QualityFlag[]; thicknessMm: number | null; errors: Partial<Record<SurveyRowField, string>> };

/** The flags a row raises as typed: the same parser and calculation the server runs on submit. */
function liveOf(cml: SurveyCml, row: SurveyRowText, siteToday: string): Live {
  const parsed = parseSurveyRow(row, { cmlTag: cml.tag, siteToday, lastApprovedOn: cml.lastApproved?.date ?? null });
  if ("empty" in parsed) return { flags: [], thicknessMm: null, errors: {} };
  if ("errors" in parsed) return { flags: [], thicknessMm: null, errors: parsed.errors };
  const r = parsed.reading;
  return {
    thicknessMm: r.thicknessMm,
    errors: {},
    flags: surveyReadingFlags({
      reading: { date: r.measuredOn, thicknessMm: r.thicknessMm, quadrantReadingsMm: r.quadrantReadingsMm },
      history: cml.history,
      baseline: cml.baseline,
      requiredThicknessMm: cml.requiredThicknessMm,
      instrumentResolutionMm: r.resolutionMm,
    }),
  };
}

export default function SurveyPage({ loaderData, actionData }: Route.ComponentProps) {
  const { survey, units, attachments } = loaderData;
  const navigation = useNavigation();
  const busy = navigation.state === "submitting";
  const saveFailure = formFailure(actionData, { intent: "saveReadings" });
  const submitFailure = formFailure(actionData, { intent: "submit" });
  const [rows, setRows] = useState<RowState>(() =>
    startingRows(survey.cmls, saveFailure.sent ? actionData?.values : undefined, survey.siteToday),
  );
  const [dirty, setDirty] = useState(saveFailure.sent);
  const [common, setCommon] = useState({
    measuredOn: survey.siteToday,
    method: "UT",
    instrument: "",
    resolutionMm: "",
    technician: "",
  });
  const set = (cmlId: string, change: Partial<SurveyRowText>) => {
    setRows((r) => ({ ...r, [cmlId]: { ...r[cmlId], ...change } }));
    setDirty(true);
  };
  const live = useMemo(
    () => Object.fromEntries(survey.cmls.map((m) => [m.id, liveOf(m, rows[m.id], survey.siteToday)])),
    [rows, survey.cmls, survey.siteToday],
  );
  const warnings = Object.values(live).reduce((n, l) => n + l.flags.filter((f) => f.severity === "warning").length, 0);
  const entered = Object.values(live).filter((l) => l.thicknessMm !== null).length;
  const serverErrors = saveFailure.errors;
  const errorOf = (cmlId: string, field: SurveyRowField) =>
    serverErrors[`${cmlId}.${field}`] ??
    (rows[cmlId] && !dirtyEmpty(rows[cmlId]) ? live[cmlId].errors[field] : undefined);

  return (
    <div className="space-y-6">
      <PageHeader
        title={`Thickness survey ${survey.reference}`}
        question={
          survey.editable
            ? "Enter a reading per CML as you measure: the flags update as you type. Save the grid, attach the sheets, then submit the survey."
            : "What this survey holds and where it stands."
        }
        actions={<Link to="/surveys">All surveys</Link>}
      >
        <div className="mt-2 flex flex-wrap items-center gap-2 text-sm">
          <StatusBadge status={survey.status} /> <span>revision {survey.revision}</span>
        </div>
      </PageHeader>
      {survey.decisionComment ? (
        <FormAlert tone="warn">
          Returned by the owner’s engineer: “{survey.decisionComment}” Change what it asks, save, then submit again with
          a reply below.
        </FormAlert>
      ) : null}
      <Card title="Survey">
        <Facts
          items={[
            [
              "Site",
              `${survey.siteName}, ${survey.ownerName} (today at the site: ${survey.siteToday}, ${survey.timeZone})`,
            ],
            [
              "Circuits",
              survey.circuits
                .map(
                  (c) =>
                    `${c.tag}${c.requiredThickness.status === "ok" ? ` (required ${formatQuantity("thickness", c.requiredThickness.requiredMm, units)})` : " (required thickness not set up)"}`,
                )
                .join(", "),
            ],
            ["CMLs", String(survey.cmls.length)],
            ["Submitted", survey.submittedAt ? formatLocal(survey.submittedAt, survey.timeZone) : "not yet"],
          ]}
        />
        {survey.editable ? (
          <p className="mt-3 text-sm">
            <Link to={`/surveys/${survey.id}/import`}>Import readings from a CSV file</Link> ·{" "}
            <Link to="/surveys#start">Add circuits</Link>
          </p>
        ) : null}
      </Card>

      {survey.cmls.length === 0 ? (
        <FormAlert tone="warn">
          The owner has set up no CMLs on these circuits yet, so there is nothing to measure. Ask the owner’s engineer
          to add them.
        </FormAlert>
      ) : (
        <Form method="post" noValidate className="space-y-4" onSubmit={() => setDirty(false)}>
          <input type="hidden" name="intent" value="saveReadings" />
          {serverErrors.form ? <FormAlert>{serverErrors.form}</FormAlert> : null}
          {saveFailure.count > 0 && !serverErrors.form ? (
            <FormAlert>Nothing was saved: correct the {saveFailure.count} field(s) marked below.</FormAlert>
          ) : null}
          {survey.editable ? (
            <Card title="Same for every CML">
              <p className="mb-3 text-xs text-ink-faint">
                Fill these once and apply them to every row; each row can still be changed.
              </p>
              <div className="grid gap-3 sm:grid-cols-2 lg:grid-cols-5">
                <CommonInput
                  label="Date"
                  type="date"
                  max={survey.siteToday}
                  value={common.measuredOn}
                  onChange={(v) => setCommon((c) => ({ ...c, measuredOn: v }))}
                />
                <label className="block text-sm">
                  <span className="font-medium">Method</span>
                  <select
                    value={common.method}
                    onChange={(e) => setCommon((c) => ({ ...c, method: e.target.value }))}
                    className="mt-1 block w-full rounded-md border border-rule bg-white px-2 py-2 text-sm touch:min-h-11"
                  >
                    {SURVEY_METHODS.map((m) => (
                      <option key={m} value={m}>
                        {surveyMethodLabels[m]}
                      </option>
                    ))}
                  </select>
                </label>
                <CommonInput
                  label="Instrument"
                  value={common.instrument}
                  onChange={(v) => setCommon((c) => ({ ...c, instrument: v }))}
                />
                <CommonInput
                  label="Resolution, mm"
                  inputMode="decimal"
                  value={common.resolutionMm}
                  onChange={(v) => setCommon((c) => ({ ...c, resolutionMm: v }))}
                />
                <CommonInput
                  label="Technician"
                  value={common.technician}
                  onChange={(v) => setCommon((c) => ({ ...c, technician: v }))}
                />
              </div>
              <div className="mt-3">
                <Button
                  variant="secondary"
                  onClick={() => {
                    setRows((r) =>
                      Object.fromEntries(Object.entries(r).map(([id, row]) => [id, { ...row, ...common }])),
                    );
                    setDirty(true);
                  }}
                >
                  Apply to every row
                </Button>
              </div>
            </Card>
          ) : null}
          <ol className="space-y-3" aria-label="CMLs of the survey">
            {survey.cmls.map((m) => (
              <CmlRow
                key={m.id}
                cml={m}
                row={rows[m.id]}
                live={live[m.id]}
                stored={survey.editable ? null : m.flags}
                units={units}
                editable={survey.editable}
                siteToday={survey.siteToday}
                errorOf={(f) => errorOf(m.id, f)}
                onChange={(change) => set(m.id, change)}
              />
            ))}
          </ol>
          {survey.editable ? (
            <div
              className="sticky bottom-0 z-10 flex flex-wrap items-center gap-3 rounded-md border-t border-rule bg-panel px-4 py-2 shadow-[0_-2px_6px_rgba(0,0,0,0.06)]"
              data-testid="grid-summary"
            >
              <Button type="submit" disabled={busy}>
                {busy && navigation.formData?.get("intent") === "saveReadings" ? "Saving…" : "Save the readings"}
              </Button>
              <span className="text-sm" aria-live="polite">
                {entered} of {survey.cmls.length} CMLs read
                {warnings ? (
                  <span className="text-warn">
                    {" "}
                    · ▲ {warnings} warning{warnings === 1 ? "" : "s"}
                  </span>
                ) : null}
                {dirty ? <span className="text-ink-soft"> · not saved yet</span> : null}
              </span>
            </div>
          ) : null}
          <EngineeringCaution compact />
        </Form>
      )}

      <Card title="Survey sheet, photos and the instrument's export">
        <SurveyAttachments submissionId={survey.id} attachments={attachments} locked={!survey.editable} />
      </Card>

      {survey.editable ? (
        <Card title="Submit to the owner">
          <Form method="post" className="space-y-3">
            <input type="hidden" name="intent" value="submit" />
            {submitFailure.sent ? (
              <FormAlert>
                Not submitted.{" "}
                {Object.entries(submitFailure.errors).map(([k, v]) => (
                  <span key={k}>{v} </span>
                ))}
              </FormAlert>
            ) : null}
            <p className="text-sm text-ink-soft">
              The server checks every saved reading again and stores its flags with the survey. Once submitted, the
              readings and files can no longer change.
            </p>
            {survey.status === "returned" ? (
              <TextAreaField
                label="Reply to the engineer’s comment"
                name="reply"
                rows={3}
                defaultValue={submitFailure.value("reply", "")}
                error={submitFailure.errors.reply}
                hint="Say what you changed; it is kept with the new revision."
              />
            ) : null}
            {dirty ? (
              <p className="text-sm font-medium text-warn" role="status">
                ▲ The grid has changes that are not saved: save the readings first, or they are not submitted.
              </p>
            ) : null}
            <Button type="submit" disabled={busy || dirty}>
              {busy && navigation.formData?.get("intent") === "submit" ? "Submitting…" : "Submit the survey"}
            </Button>
          </Form>
        </Card>
      ) : (
        <p>
          <ButtonLink to="/surveys">Back to the surveys</ButtonLink>
        </p>
      )}
    </div>
  );
}

const dirtyEmpty = (row: SurveyRowText) => row.readings.every((r) => !r.trim()) && !row.notes.trim();

function CommonInput({
  label,
  value,
  onChange,
  ...props
}: { label: string; value: string; onChange: (v: string) => void } & Omit<
  React.InputHTMLAttributes<HTMLInputElement>,
  "onChange" | "value"
>) {
  return (
    <label className="block text-sm">
      <span className="font-medium">{label}</span>
      <input
        {...props}
        value={value}
        onChange={(e) => onChange(e.target.value)}
        className="mt-1 block w-full rounded-md border border-rule bg-white px-2 py-2 text-sm touch:min-h-11"
      />
    </label>
  );
}

const input =
  "block w-full min-w-0 rounded-md border bg-white px-2 py-1.5 text-sm touch:min-h-11 aria-invalid:border-bad";

function CmlRow({
  cml,
  row,
  live,
  stored,
  units,
  editable,
  siteToday,
  errorOf,
  onChange,
}: {
  cml: SurveyCml;
  row: SurveyRowText;
  live: Live;
  /** Flags stored at submit (a survey no longer editable); null while editing. */
  stored: QualityFlag[] | null;
  units: "si" | "us";
  editable: boolean;
  siteToday: string;
  errorOf: (field: SurveyRowField) => string | undefined;
  onChange: (change: Partial<SurveyRowText>) => void;
}) {
  const name = (field: Parameters<typeof surveyFieldName>[1]) => surveyFieldName(cml.id, field);
  const errors = (["measuredOn", "readings", "method", "instrument", "resolutionMm", "technician", "notes"] as const)
    .map((f) => errorOf(f))
    .filter((e): e is string => Boolean(e));
  const flags = stored ?? live.flags;
  const id = `cml-${cml.id}`;
  return (
    <li className="rounded-lg border border-rule bg-panel p-3" data-testid="cml-row" aria-labelledby={`${id}-tag`}>
      <div className="flex flex-wrap items-baseline justify-between gap-x-4 gap-y-1">
        <h3 id={`${id}-tag`} className="text-base font-semibold">
          <span className="whitespace-nowrap">{cml.tag}</span>{" "}
          <span className="text-sm font-normal text-ink-soft">
            circuit {cml.circuitTag} · {componentWord(cml.component)}
            {cml.location ? ` · ${cml.location}` : ""}
          </span>
          {cml.injectionPoint ? (
            <span className="ml-2 inline-flex items-center gap-1 rounded border border-rule px-1.5 py-0.5 text-xs font-medium">
              <span aria-hidden="true">◆</span> injection point
            </span>
          ) : null}
        </h3>
        <p className="text-sm text-ink-soft">
          Last approved:{" "}
          {cml.lastApproved ? (
            <span className="num whitespace-nowrap text-ink">
              {formatQuantity("thickness", cml.lastApproved.thicknessMm, units)} on {cml.lastApproved.date}
            </span>
          ) : cml.baseline ? (
            <span className="whitespace-nowrap">
              none; base-line {formatQuantity("thickness", cml.baseline.thicknessMm, units)} on {cml.baseline.date}
            </span>
          ) : (
            "none (first reading)"
          )}
          {cml.requiredThicknessMm !== null ? (
            <span className="whitespace-nowrap">
              {" "}
              · required {formatQuantity("thickness", cml.requiredThicknessMm, units)}
            </span>
          ) : null}
        </p>
      </div>
      <fieldset
        disabled={!editable}
        className="mt-2 grid grid-cols-2 gap-2 sm:grid-cols-4 lg:grid-cols-[9rem_repeat(4,minmax(0,6rem))_9rem_minmax(0,1fr)_6rem_minmax(0,1fr)]"
      >
        <legend className="sr-only">Reading at {cml.tag}</legend>
        <label className="col-span-2 block text-xs sm:col-span-1">
          <span className="text-ink-soft">Date</span>
          <input
            type="date"
            name={name("measuredOn")}
            max={siteToday}
            value={row.measuredOn}
            onChange={(e) => onChange({ measuredOn: e.target.value })}
            aria-invalid={errorOf("measuredOn") ? true : undefined}
            className={`${input} ${errorOf("measuredOn") ? "border-bad" : "border-rule"}`}
          />
        </label>
        {Array.from({ length: READING_FIELDS }, (_, i) => (
          <label key={i} className="block text-xs">
            <span className="text-ink-soft">{["12", "3", "6", "9"][i]} o’clock, mm</span>
            <input
              name={name(`reading${i + 1}`)}
              inputMode="decimal"
              autoComplete="off"
              value={row.readings[i] ?? ""}
              onChange={(e) => onChange({ readings: row.readings.map((r, j) => (j === i ? e.target.value : r)) })}
              aria-label={`${cml.tag} reading ${i + 1} (${["12", "3", "6", "9"][i]} o’clock), mm`}
              aria-invalid={errorOf("readings") ? true : undefined}
              className={`${input} num ${errorOf("readings") ? "border-bad" : "border-rule"}`}
            />
          </label>
        ))}
        <label className="block text-xs">
          <span className="text-ink-soft">Method</span>
          <select
            name={name("method")}
            value={row.method}
            onChange={(e) => onChange({ method: e.target.value })}
            className={`${input} border-rule`}
          >
            {SURVEY_METHODS.map((m) => (
              <option key={m} value={m}>
                {m}
              </option>
            ))}
          </select>
        </label>
        <label className="block text-xs">
          <span className="text-ink-soft">Instrument</span>
          <input
            name={name("instrument")}
            value={row.instrument}
            onChange={(e) => onChange({ instrument: e.target.value })}
            className={`${input} ${errorOf("instrument") ? "border-bad" : "border-rule"}`}
          />
        </label>
        <label className="block text-xs">
          <span className="text-ink-soft">Resolution, mm</span>
          <input
            name={name("resolutionMm")}
            inputMode="decimal"
            value={row.resolutionMm}
            onChange={(e) => onChange({ resolutionMm: e.target.value })}
            className={`${input} num ${errorOf("resolutionMm") ? "border-bad" : "border-rule"}`}
          />
        </label>
        <label className="block text-xs">
          <span className="text-ink-soft">Technician</span>
          <input
            name={name("technician")}
            value={row.technician}
            onChange={(e) => onChange({ technician: e.target.value })}
            className={`${input} ${errorOf("technician") ? "border-bad" : "border-rule"}`}
          />
        </label>
        <label className="col-span-2 block text-xs sm:col-span-4 lg:col-span-9">
          <span className="text-ink-soft">Notes</span>
          <textarea
            name={name("notes")}
            rows={1}
            value={row.notes}
            onChange={(e) => onChange({ notes: e.target.value })}
            className={`${input} ${errorOf("notes") ? "border-bad" : "border-rule"}`}
          />
        </label>
      </fieldset>
      {errors.length ? (
        <ul className="mt-2 space-y-0.5 text-xs font-medium text-bad" role="alert">
          {errors.map((e) => (
            <li key={e}>{e}</li>
          ))}
        </ul>
      ) : null}
      <div className="mt-2 text-sm" aria-live="polite" data-testid="cml-flags">
        {live.thicknessMm !== null ? (
          <p className="text-ink-soft">
            Thickness (the least reading):{" "}
            <span className="num font-medium text-ink">{formatQuantity("thickness", live.thicknessMm, units)}</span>
            {units === "us" ? <span className="num text-xs"> ({live.thicknessMm} mm)</span> : null}
          </p>
        ) : null}
        {flags.length > 0 ? (
          <FlagList flags={flags} />
        ) : live.thicknessMm !== null ? (
          <p className="text-ink-soft">
            <span aria-hidden="true">✓</span> No flags.
          </p>
        ) : null}
      </div>
    </li>
  );
}

export const meta: Route.MetaFunction = ({ data }) => [
  { title: `Thickness survey ${data?.survey.reference ?? ""} · Wallcast` },
];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
