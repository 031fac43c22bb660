import { useMemo, useState, type ReactNode } from "react";
import { data, Form, Link, useNavigation } from "react-router";
import { AttachmentDropzone } from "~/components/attachment-dropzone";
import { SeverityBadge } from "~/components/badges";
import { Button } from "~/components/button";
import { FormAlert, SelectField, TextAreaField, TextField } from "~/components/field";
import { Card, EngineeringCaution, Facts, PageHeader } from "~/components/layout";
import {
  describeGeometry,
  FlagList,
  formatPittingFactor,
  Grade,
  massLossMethodWords,
  NotDeterminable,
} from "~/components/coupon-result";
import { formatGrams, formatQuantity } from "~/components/quantity";
import type { Units } from "~/context";
import type { CouponAssessment } from "~/domain/index.ts";
import { listAttachments } from "~/models/attachments.server";
import { calculationInput, exposureForLab, saveLabResult } from "~/models/lab-results.server";
import { densitySourceLabel, materialName } from "~/services/coupon-spec";
import { checkLab, labTextOf, parseLabText, type LabInputs, type LabText } from "~/services/lab-spec";
import { ownerSettings } from "~/models/owner-settings.server";
import { db } from "~/services/db.server";
import { redirectWithFlash } from "~/services/flash.server";
import { requireUser, requireUuid } from "~/services/guards.server";
import { can } from "~/services/permissions";
import { requestIdOf } from "~/services/problem.server";
import { formAction, pageLoad, readFormParts } from "~/services/respond.server";
import { Conflict, Invalid } from "~/services/outcome";
import { formatLocal } from "~/services/time";
import type { Route } from "./+types/lab.$exposureId";

// The lab form, its live preview and the server judge the text the same way
// (services/lab-spec.ts checkLab), as the lab CSV import parses it.

/** The lab text of a form body; the cycles are repeated fields. */
function labTextOfForm(values: Record<string, string>, lists: Record<string, string[]>): LabText {
  return {
    cleaningMethod: values.cleaningMethod ?? "",
    massLossMethod: values.massLossMethod ?? "",
    couponMassesG: lists.couponMass ?? [],
    finalMassG: values.finalMassG ?? "",
    blankInitialMassG: values.blankInitialMassG ?? "",
    blankMassesG: lists.blankMass ?? [],
    baseMetalFromCycle: values.baseMetalFromCycle ?? "",
    pitDepthsMm: values.pitDepthsMm ?? "",
    labNotes: values.labNotes ?? "",
  };
}

// ------------------------------------------------------------------ loader / action

async function load(args: Route.LoaderArgs | Route.ActionArgs) {
  const user = requireUser(args);
  const exposureId = requireUuid(args.params.exposureId);
  return { user, exposure: await pageLoad(() => exposureForLab(db(), user, exposureId)) };
}

export async function loader(args: Route.LoaderArgs) {
  const { user, exposure } = await load(args);
  if (!can(user, "recordWork")) throw data("Only the contractor's technicians enter lab results.", { status: 403 });
  const settings = await ownerSettings(db(), exposure.ownerId);
  // The calculation input without lab numbers: the form fills those in as the user types.
  const base = calculationInput(exposure, emptyLab, settings);
  const attachments = await listAttachments(db(), user, exposure);
  return { exposure, base, units: user.units, attachments };
}

const emptyLab: LabInputs = {
  cleaningMethod: "",
  couponMassesG: [],
  finalMassG: null,
  blankInitialMassG: null,
  blankMassesG: [],
  baseMetalFromCycle: null,
  pitDepthsMm: [],
  labNotes: "",
};

export async function action(args: Route.ActionArgs) {
  const { user, exposure } = await load(args);
  // the permission before the body is judged: the owner's staff get 403, not the form's messages
  if (!can(user, "recordWork")) throw data("Only the contractor's technicians enter lab results.", { status: 403 });
  const { values, lists } = await readFormParts(args.request);
  const text = labTextOfForm(values, lists);
  const base = calculationInput(exposure, emptyLab, await ownerSettings(db(), exposure.ownerId));
  return formAction(values, async () => {
    // A result already sent is a changed state (409) whatever the body says.
    if (exposure.locked)
      throw new Conflict(
        `These results are already in submission ${exposure.locked.reference} (${exposure.locked.status}).`,
      );
    // Every field's problem in one round: the parser's and the calculation's.
    const checked = checkLab(base, text);
    if (!checked.lab)
      throw new Invalid(checked.errors, { couponMass: text.couponMassesG, blankMass: text.blankMassesG });
    const lab = checked.lab;
    const outcome = await saveLabResult(db(), user, exposure.exposureId, lab, requestIdOf(args.context), text);
    return redirectWithFlash(`/submissions/${outcome.submissionId}`, {
      tone: "ok",
      message: `Lab results for ${exposure.coupon.serial} saved in the draft submission. Send it for review when it is complete.`,
    });
  });
}

// ------------------------------------------------------------------ component

export default function LabResults({ loaderData, actionData }: Route.ComponentProps) {
  const { exposure, base, units, attachments } = loaderData;
  const serverErrors: Record<string, string> = actionData?.errors ?? {};
  const busy = useNavigation().state === "submitting";
  // What was typed stays as typed: after a refused save (also without JavaScript) and when
  // saved results are reopened ("0.30" is not shown back as "0.3").
  const [start] = useState<LabText>(() => {
    if (actionData?.values) {
      const typed = (actionData.details ?? {}) as Record<string, string[] | undefined>;
      return labTextOfForm(actionData.values, { couponMass: typed.couponMass ?? [], blankMass: typed.blankMass ?? [] });
    }
    return exposure.draft?.text ?? { ...labTextOf(emptyLab), massLossMethod: "" };
  });
  const rows = Math.max(3, start.couponMassesG.length, start.blankMassesG.length);
  const pad = (list: string[]) => Array.from({ length: rows }, (_, i) => list[i] ?? "");
  const [couponMass, setCouponMass] = useState<string[]>(() => pad(start.couponMassesG));
  const [blankMass, setBlankMass] = useState<string[]>(() => pad(start.blankMassesG));
  const [text, setText] = useState({
    cleaningMethod: start.cleaningMethod,
    massLossMethod: start.massLossMethod ?? "",
    finalMassG: start.finalMassG,
    blankInitialMassG: start.blankInitialMassG,
    baseMetalFromCycle: start.baseMetalFromCycle,
    pitDepthsMm: start.pitDepthsMm,
    labNotes: start.labNotes,
  });
  const set = (k: keyof typeof text) => (e: { target: { value: string } }) =>
    setText((t) => ({ ...t, [k]: e.target.value }));

  // The live preview: the same checks and calculation the server runs on save and on submit.
  const preview = useMemo(() => {
    const typed: LabText = {
      ...text,
      // the cycle choice is sent only with the cleaning curve
      baseMetalFromCycle: text.massLossMethod === "cleaning-curve" ? text.baseMetalFromCycle : "",
      couponMassesG: couponMass,
      blankMassesG: blankMass,
    };
    const checked = checkLab(base, typed);
    const parsed = parseLabText(typed);
    const hasMass = parsed.candidate.couponMassesG.length > 0 || parsed.candidate.finalMassG !== null;
    if (!hasMass && !text.massLossMethod) return { waiting: true, method: checked.method } as const;
    if (checked.result) return { result: checked.result, method: checked.method } as const;
    return { errors: checked.errors, method: checked.method } as const;
  }, [text, couponMass, blankMass, base]);
  const liveErrors: Record<string, string> = "errors" in preview && preview.errors ? preview.errors : {};
  const errors = { ...liveErrors, ...serverErrors };
  const cycles = couponMass.length;
  const method = text.massLossMethod;
  const uses: Record<string, string> = {
    "final-mass": "The rate uses the final mass; masses after cleaning cycles are not used.",
    "last-cycle":
      "The rate uses the mass after the last cleaning cycle (less the blank’s loss); a final mass is not used.",
    "cleaning-curve":
      "The rate uses the cleaning curve through the base-metal cycles (ASTM G1 §7); a final mass and the blank’s loss are not used.",
  };

  return (
    <div className="space-y-6">
      <PageHeader
        title={`Lab results · ${exposure.coupon.serial}`}
        question="What did the lab weigh and measure, and what rate does that give? The preview updates as you type; the server recomputes on save."
        actions={<Link to="/pulls">Back to the pull schedule</Link>}
      />
      {exposure.draft?.returnComment ? (
        <FormAlert tone="warn">
          Submission {exposure.draft.reference} came back from the owner’s engineer: “{exposure.draft.returnComment}”
          Change what it asks here, then send the submission again from{" "}
          <Link to={`/submissions/${exposure.draft.submissionId}`}>its page</Link>, where you can reply to the comment.
        </FormAlert>
      ) : null}
      {exposure.locked ? (
        <FormAlert tone="warn">
          These results are in submission {exposure.locked.reference}, which is {exposure.locked.status}; they can no
          longer be edited here.
        </FormAlert>
      ) : null}
      <div className="grid gap-6 lg:grid-cols-[minmax(0,1fr)_24rem]">
        <div className="space-y-6">
          <Card title="Coupon and exposure">
            <Facts
              items={[
                ["Point", `${exposure.pointTag} (circuit ${exposure.circuitTag}) at ${exposure.siteName}`],
                ["Installed", `${formatLocal(exposure.installedAt, exposure.timeZone)} (${exposure.timeZone})`],
                ["Removed", `${formatLocal(exposure.removedAt, exposure.timeZone)} (${exposure.timeZone})`],
                [
                  "Material",
                  `${materialName(exposure.coupon.materialCode)}, ${exposure.coupon.densityGcm3} g/cm³ (${densitySourceLabel(exposure.coupon.densitySource)})`,
                ],
                ["Geometry", describeGeometry(exposure.coupon.geometry)],
                ["Initial mass", formatGrams(exposure.coupon.initialMassG)],
                ["Balance resolution", formatGrams(exposure.coupon.balanceResolutionG, 5)],
                [
                  "As removed",
                  `${exposure.deposits || "no deposits recorded"}; pitting ${exposure.pittingVisible === null ? "not recorded" : exposure.pittingVisible ? "visible" : "not seen"}`,
                ],
              ]}
            />
          </Card>
          <Form method="post" className="space-y-6" noValidate>
            {serverErrors.form ? <FormAlert>{serverErrors.form}</FormAlert> : null}
            <Card title="Cleaning and weighing">
              <div className="grid gap-4 sm:grid-cols-2">
                <TextField
                  label="Cleaning method"
                  name="cleaningMethod"
                  value={text.cleaningMethod}
                  onChange={set("cleaningMethod")}
                  placeholder="e.g. inhibited hydrochloric acid, ASTM G1 C.3.5"
                  error={errors.cleaningMethod}
                />
                <TextField
                  label="Blank mass before cleaning"
                  name="blankInitialMassG"
                  inputMode="decimal"
                  unit="g"
                  value={text.blankInitialMassG}
                  onChange={set("blankInitialMassG")}
                  error={errors.blankInitialMassG}
                  hint="The control coupon, cleaned with the same cycles. Leave empty if no blank was run."
                />
              </div>
              <div className="mt-4 grid gap-4 sm:grid-cols-2">
                <SelectField
                  label="Mass loss from"
                  name="massLossMethod"
                  value={method}
                  onChange={set("massLossMethod")}
                  error={errors.massLossMethod}
                  hint={
                    uses[method] ??
                    (preview.method && preview.method !== "final-mass"
                      ? uses[preview.method]
                      : "Enter either a final mass or the masses after each cleaning cycle; with both, choose here which one the rate uses.")
                  }
                >
                  <option value="">whichever masses are entered</option>
                  <option value="final-mass">one final weighing after cleaning</option>
                  <option value="last-cycle">the last cleaning cycle (less the blank’s loss)</option>
                  <option value="cleaning-curve">the cleaning curve (ASTM G1 §7)</option>
                </SelectField>
                {method === "cleaning-curve" ? (
                  <SelectField
                    label="Base-metal line from cycle"
                    name="baseMetalFromCycle"
                    value={text.baseMetalFromCycle}
                    onChange={set("baseMetalFromCycle")}
                    error={errors.baseMetalFromCycle}
                    hint="The cleaning curve fits a line through the base-metal cycles and extrapolates it to zero cycles."
                  >
                    <option value="">choose the first base-metal cycle</option>
                    {Array.from({ length: Math.max(0, cycles - 1) }, (_, i) => (
                      <option key={i + 1} value={i + 1}>
                        cycle {i + 1}
                      </option>
                    ))}
                  </SelectField>
                ) : (
                  <TextField
                    label={
                      method === "final-mass"
                        ? "Final mass after cleaning"
                        : method === ""
                          ? "Final mass (if no cycles were weighed)"
                          : "Final mass (not used with cleaning cycles)"
                    }
                    name="finalMassG"
                    inputMode="decimal"
                    unit="g"
                    value={text.finalMassG}
                    onChange={set("finalMassG")}
                    error={errors.finalMassG}
                  />
                )}
              </div>
              {errors.baseMetalFromCycle && method !== "cleaning-curve" ? (
                <p className="mt-1 text-xs font-medium text-bad" role="alert">
                  {errors.baseMetalFromCycle}
                </p>
              ) : null}
              <fieldset className="mt-4">
                <legend className="text-sm font-medium">
                  {method === "final-mass"
                    ? "Mass after each cleaning cycle (not used: the rate uses the final mass)"
                    : "Mass after each cleaning cycle"}
                </legend>
                <p className="text-xs text-ink-faint">
                  Cumulative: weigh after each cycle without re-weighing from the start. The blank column is used with a
                  final mass too.
                </p>
                <table className="mt-2 w-full text-sm sm:w-auto">
                  <thead>
                    <tr className="text-left text-xs text-ink-soft">
                      <th className="pr-3 font-medium">Cycle</th>
                      <th className="pr-3 font-medium">Coupon, g</th>
                      <th className="font-medium">Blank, g</th>
                    </tr>
                  </thead>
                  <tbody>
                    {couponMass.map((value, i) => (
                      <tr key={i}>
                        <td className="pr-3 text-ink-soft">{i + 1}</td>
                        <td className="py-1 pr-3">
                          <input
                            name="couponMass"
                            aria-label={`Coupon mass after cycle ${i + 1}, grams`}
                            inputMode="decimal"
                            value={value}
                            onChange={(e) => setCouponMass((m) => m.map((x, j) => (j === i ? e.target.value : x)))}
                            className="w-full min-w-0 rounded-md border border-rule px-2 py-1.5 num sm:w-36"
                          />
                        </td>
                        <td className="py-1">
                          <input
                            name="blankMass"
                            aria-label={`Blank mass after cycle ${i + 1}, grams`}
                            inputMode="decimal"
                            value={blankMass[i] ?? ""}
                            onChange={(e) => setBlankMass((m) => m.map((x, j) => (j === i ? e.target.value : x)))}
                            className="w-full min-w-0 rounded-md border border-rule px-2 py-1.5 num sm:w-36"
                          />
                        </td>
                      </tr>
                    ))}
                  </tbody>
                </table>
                <div className="mt-2 flex gap-2">
                  <Button
                    variant="secondary"
                    onClick={() => {
                      setCouponMass((m) => [...m, ""]);
                      setBlankMass((m) => [...m, ""]);
                    }}
                  >
                    Add a cycle
                  </Button>
                  {cycles > 1 ? (
                    <Button
                      variant="quiet"
                      onClick={() => {
                        setCouponMass((m) => m.slice(0, -1));
                        setBlankMass((m) => m.slice(0, -1));
                      }}
                    >
                      Remove the last cycle
                    </Button>
                  ) : null}
                </div>
                {errors.couponMassesG ? (
                  <p className="mt-1 text-xs font-medium text-bad" role="alert">
                    {errors.couponMassesG}
                  </p>
                ) : null}
                {errors.blankMassesG ? (
                  <p className="mt-1 text-xs font-medium text-bad" role="alert">
                    {errors.blankMassesG}
                  </p>
                ) : null}
              </fieldset>
            </Card>
            <Card title="Pits">
              <TextField
                label="Deepest pit depths"
                name="pitDepthsMm"
                unit="mm"
                value={text.pitDepthsMm}
                onChange={set("pitDepthsMm")}
                placeholder="e.g. 0.12, 0.09, 0.07"
                hint="Separate depths with commas, spaces, semicolons or new lines; use a point as the decimal mark. Leave empty if no pits were measured."
                error={errors.pitDepthsMm}
              />
              <div className="mt-4">
                <TextAreaField
                  label="Lab notes"
                  name="labNotes"
                  rows={2}
                  value={text.labNotes}
                  onChange={set("labNotes")}
                  error={errors.labNotes}
                />
              </div>
            </Card>
            {Object.keys(serverErrors).length > 0 && !serverErrors.form ? (
              <FormAlert>Nothing was saved: correct the fields marked above.</FormAlert>
            ) : null}
            <Button type="submit" disabled={busy || Boolean(exposure.locked)}>
              {busy ? "Saving…" : "Save to the draft submission"}
            </Button>
            <PreviewSummary preview={preview} units={units} />
          </Form>
          <Card title="Photos and lab sheet">
            <AttachmentDropzone
              exposureId={exposure.exposureId}
              attachments={attachments}
              locked={Boolean(exposure.locked)}
            />
          </Card>
        </div>
        <aside
          id="live-preview"
          aria-live="polite"
          aria-label="Live preview"
          className="lg:sticky lg:top-4 lg:self-start"
        >
          <Preview preview={preview} units={units} />
        </aside>
      </div>
    </div>
  );
}

/**
 * Below 1024 px the full preview sits under the form: this bar stays at the foot of the
 * screen while the technician types, with the rate and grade the numbers give now.
 */
function PreviewSummary({
  preview,
  units,
}: {
  preview: { result: CouponAssessment } | { errors: Record<string, string> } | { waiting: true };
  units: Units;
}) {
  let text: ReactNode;
  if ("waiting" in preview) text = "Preview: type the masses to see the rate.";
  else if ("errors" in preview)
    text = <span className="text-bad">Preview waits for valid numbers ({Object.keys(preview.errors).length}).</span>;
  else {
    const r = preview.result;
    const warnings = r.flags.filter((f) => f.severity === "warning").length;
    text = (
      <>
        <span className="whitespace-nowrap">
          General {r.rate ? formatQuantity("rate", r.rate.mmPerYear, units) : "not determinable"}
        </span>{" "}
        <Grade value={r.severity.general} basis={r.severity.generalBasis} />
        {r.pitting ? (
          <span className="whitespace-nowrap"> · pitting {formatQuantity("rate", r.pitting.mmPerYear, units)}</span>
        ) : null}
        {warnings ? (
          <span className="whitespace-nowrap text-warn">
            {" "}
            · ▲ {warnings} warning{warnings === 1 ? "" : "s"}
          </span>
        ) : null}
      </>
    );
  }
  return (
    <div
      className="sticky bottom-0 z-10 flex rounded-md flex-wrap items-center gap-x-2 gap-y-1 border-t border-rule bg-panel px-4 py-2 text-sm shadow-[0_-2px_6px_rgba(0,0,0,0.06)] lg:hidden"
      data-testid="preview-summary"
    >
      <span className="min-w-0 flex-1">{text}</span>
      <a href="#live-preview" className="whitespace-nowrap text-xs">
        Full preview
      </a>
    </div>
  );
}

function Preview({
  preview,
  units,
}: {
  preview: { result: CouponAssessment } | { errors: Record<string, string> } | { waiting: true };
  units: Units;
}) {
  if ("waiting" in preview) {
    return (
      <Card title="Preview">
        <p className="text-sm text-ink-soft">
          Type the masses after cleaning (or the final mass) to see the mass loss, rates and severity.
        </p>
      </Card>
    );
  }
  if ("errors" in preview) {
    return (
      <Card title="Preview">
        <p className="text-sm text-bad">The preview waits for valid numbers:</p>
        <ul className="mt-1 list-disc pl-5 text-sm text-bad">
          {Object.values(preview.errors).map((e) => (
            <li key={e}>{e}</li>
          ))}
        </ul>
      </Card>
    );
  }
  const r = preview.result;
  return (
    <Card title="Preview">
      <dl className="grid grid-cols-[max-content_1fr] gap-x-4 gap-y-1.5 text-sm" data-testid="preview">
        <dt className="text-ink-soft">Exposed area</dt>
        <dd className="num" data-testid="preview-area">
          {r.areaCm2.toFixed(2)} cm²
        </dd>
        <dt className="text-ink-soft">Exposure</dt>
        <dd className="num">
          {r.exposureDays.toFixed(1)} d ({r.exposureHours.toFixed(0)} h)
        </dd>
        <dt className="text-ink-soft">Mass loss</dt>
        <dd className="num" data-testid="preview-loss">
          {formatGrams(r.massLoss.correctedG)}{" "}
          <span className="text-xs text-ink-faint">({massLossMethodWords[r.massLoss.method]})</span>
        </dd>
        {r.massLoss.method === "blank-corrected" && r.massLoss.blankLossG !== null ? (
          <>
            <dt className="text-ink-soft">Blank loss</dt>
            <dd className="num">{formatGrams(r.massLoss.blankLossG)}</dd>
          </>
        ) : null}
        <dt className="text-ink-soft">General rate</dt>
        <dd className="num font-semibold" data-testid="preview-rate">
          {r.rate ? (
            <>
              {formatQuantity("rate", r.rate.mmPerYear, units)}
              <span className="ml-2 text-xs font-normal text-ink-faint">
                {formatQuantity("rate", r.rate.mmPerYear, units === "si" ? "us" : "si")} · {r.rate.mdd.toFixed(2)} mdd
              </span>
            </>
          ) : (
            <NotDeterminable reason={r.notDeterminableReason} />
          )}
        </dd>
        <dt className="text-ink-soft">Severity, general</dt>
        <dd>
          <Grade
            value={r.severity.general}
            basis={r.severity.generalBasis}
            emphasise={r.severity.worstKind === "general"}
          />
        </dd>
        {r.pitting ? (
          <>
            <dt className="text-ink-soft">Deepest pit</dt>
            <dd className="num">{formatQuantity("thickness", r.pitting.maxPitDepthMm, units)}</dd>
            <dt className="text-ink-soft">Pitting rate</dt>
            <dd className="num font-semibold">{formatQuantity("rate", r.pitting.mmPerYear, units)}</dd>
            <dt className="text-ink-soft">Pitting factor</dt>
            <dd className="num">
              {r.pitting.factor === null ? "— (no mass loss)" : formatPittingFactor(r.pitting.factor)}
            </dd>
            <dt className="text-ink-soft">Severity, pitting</dt>
            <dd>
              {r.severity.pitting ? (
                <SeverityBadge value={r.severity.pitting} emphasise={r.severity.worstKind === "pitting"} />
              ) : (
                "—"
              )}
            </dd>
          </>
        ) : null}
      </dl>
      {r.determinable ? null : (
        <p className="mt-3 rounded border border-rule bg-paper p-2 text-sm" role="status">
          <strong>No rate can be determined.</strong> {r.notDeterminableReason} Add a lab note saying what was checked;
          the submission can be submitted only with one, and no rate from this coupon enters the point&apos;s history.
        </p>
      )}
      <p className="mt-3 text-sm">
        Worse of the two:{" "}
        {r.severity.worst ? (
          <>
            <SeverityBadge value={r.severity.worst} emphasise /> ({r.severity.worstKind})
          </>
        ) : (
          <Grade value={null} basis={r.severity.generalBasis} />
        )}
      </p>
      {r.flags.length > 0 ? (
        <div className="mt-3">
          <h3 className="text-sm font-semibold">Quality flags ({r.flags.length})</h3>
          <FlagList flags={r.flags} testId="preview-flags" />
        </div>
      ) : (
        <p className="mt-3 text-sm text-ink-soft">No quality flags.</p>
      )}
      <p className="mt-3 text-xs text-ink-faint">
        ASTM G1 weight loss, 8760-hour year, mpy = mm/y ÷ 0.0254; severity bands{" "}
        {r.basis.thresholds.general === "NACE SP0775" ? "NACE SP0775" : "set by the owner"}.
      </p>
      <div className="mt-3">
        <EngineeringCaution compact />
      </div>
    </Card>
  );
}

export const meta: Route.MetaFunction = ({ data }) => [
  { title: `Lab results ${data?.exposure.coupon.serial ?? ""} · Wallcast` },
];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
