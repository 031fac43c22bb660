import { useMemo, useState } from "react";
import { data, Form, Link, useNavigation } from "react-router";
import { z } from "zod";
import { AttachmentDropzone } from "~/components/attachment-dropzone";
import { SeverityBadge } from "~/components/badges";
import { Button } from "~/components/button";
import { FormAlert, SelectField, TextAreaField, TextField } from "~/components/field";
import { Card, EngineeringCaution, Facts, PageHeader } from "~/components/layout";
import { FlagList, formatPittingFactor, Grade, massLossMethodWords, NotDeterminable } from "~/components/coupon-result";
import { formatGrams, formatQuantity } from "~/components/quantity";
import type { Units } from "~/context";
import { assessCoupon, type CouponAssessment, type CouponResultInput } from "~/domain/index.ts";
import { listAttachments } from "~/models/attachments.server";
import { calculationInput, exposureForLab, saveLabResult } from "~/models/lab-results.server";
import { densitySourceLabel, materialName } from "~/services/coupon-spec";
import { parseLabText, type LabInputs } from "~/services/lab-spec";
import { ownerSettings } from "~/models/owner-settings.server";
import { db } from "~/services/db.server";
import { redirectWithFlash } from "~/services/flash.server";
import { requireUser, requireUuid } from "~/services/guards.server";
import { fieldErrorsOf } from "~/services/outcome";
import { can } from "~/services/permissions";
import { requestIdOf } from "~/services/problem.server";
import { formAction, invalidForm, pageLoad, readFormParts } from "~/services/respond.server";
import { formatLocal } from "~/services/time";
import type { Route } from "./+types/lab.$exposureId";

// The lab form, its live preview and the server parse the same way (services/lab-spec.ts),
// as the lab CSV import does.
const formSchema = z.object({
  cleaningMethod: z.string().default(""),
  finalMassG: z.string().default(""),
  blankInitialMassG: z.string().default(""),
  baseMetalFromCycle: z.string().default(""),
  pitDepthsMm: z.string().default(""),
  labNotes: z.string().default(""),
});

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
  const { values, lists } = await readFormParts(args.request);
  const fields = formSchema.safeParse(values);
  if (!fields.success) return invalidForm(values, fieldErrorsOf(fields.error));
  const parsed = parseLabText({
    ...fields.data,
    couponMassesG: lists.couponMass ?? [],
    blankMassesG: lists.blankMass ?? [],
  });
  if (!parsed.lab) return invalidForm(values, parsed.errors);
  const lab = parsed.lab;
  return formAction(values, async () => {
    const outcome = await saveLabResult(db(), user, exposure.exposureId, lab, requestIdOf(args.context));
    return redirectWithFlash(`/submissions/${outcome.submissionId}`, {
      tone: "ok",
      message: `Lab results for ${exposure.coupon.serial} saved in the draft submission. Send it for review when it is complete.`,
    });
  });
}

// ------------------------------------------------------------------ component

export default function LabResults({ loaderData, actionData }: Route.ComponentProps) {
  const { exposure, base, units, attachments } = loaderData;
  const draft = exposure.draft?.inputs;
  const serverErrors: Record<string, string> = actionData?.errors ?? {};
  const busy = useNavigation().state === "submitting";
  const [couponMass, setCouponMass] = useState<string[]>(
    draft?.couponMassesG.length ? draft.couponMassesG.map(String) : ["", "", ""],
  );
  const [blankMass, setBlankMass] = useState<string[]>(
    draft?.blankMassesG.length ? draft.blankMassesG.map(String) : couponMass.map(() => ""),
  );
  const [text, setText] = useState({
    cleaningMethod: exposure.draft?.cleaningMethod ?? "",
    finalMassG: draft?.finalMassG?.toString() ?? "",
    blankInitialMassG: draft?.blankInitialMassG?.toString() ?? "",
    baseMetalFromCycle: draft?.baseMetalFromCycle?.toString() ?? "",
    pitDepthsMm: draft?.pitDepthsMm.join(" ") ?? "",
    labNotes: exposure.draft?.labNotes ?? "",
  });
  const set = (k: keyof typeof text) => (e: { target: { value: string } }) =>
    setText((t) => ({ ...t, [k]: e.target.value }));

  // The live preview: the same calculation the server runs on save and on submit.
  const preview = useMemo(() => {
    const parsed = parseLabText({ ...text, couponMassesG: couponMass, blankMassesG: blankMass });
    if (!parsed.lab) return { errors: parsed.errors } as const;
    const hasMass = parsed.lab.couponMassesG.length > 0 || parsed.lab.finalMassG !== null;
    if (!hasMass) return { waiting: true } as const;
    const input: CouponResultInput = {
      ...base,
      couponMassesG: parsed.lab.couponMassesG,
      finalMassG: parsed.lab.finalMassG,
      blankInitialMassG: parsed.lab.blankInitialMassG,
      blankMassesG: parsed.lab.blankMassesG,
      baseMetalFromCycle: parsed.lab.baseMetalFromCycle,
      pitDepthsMm: parsed.lab.pitDepthsMm,
    };
    const outcome = assessCoupon(input);
    return outcome.ok ? ({ result: outcome.result } as const) : ({ errors: outcome.errors } as const);
  }, [text, couponMass, blankMass, base]);
  const liveErrors: Record<string, string> = "errors" in preview && preview.errors ? preview.errors : {};
  const errors = { ...liveErrors, ...serverErrors };
  const cycles = couponMass.length;

  return (
    <div className="space-y-6">
      <PageHeader
        title={`Lab results · ${exposure.coupon.serial}`}
        question="What did the lab weigh and measure, and what rate does that give? The preview updates as you type; the server recomputes on save."
        actions={<Link to="/pulls">Back to the pull schedule</Link>}
      />
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
              <fieldset className="mt-4">
                <legend className="text-sm font-medium">Mass after each cleaning cycle</legend>
                <p className="text-xs text-ink-faint">
                  Cumulative: weigh after each cycle without re-weighing from the start.
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
              <div className="mt-4 grid gap-4 sm:grid-cols-2">
                <SelectField
                  label="Mass loss from"
                  name="baseMetalFromCycle"
                  value={text.baseMetalFromCycle}
                  onChange={set("baseMetalFromCycle")}
                  error={errors.baseMetalFromCycle}
                  hint="The cleaning-curve method (ASTM G1 §7) fits a line through the base-metal cycles and extrapolates to zero cycles."
                >
                  <option value="">the last cycle (minus the blank’s loss)</option>
                  {Array.from({ length: Math.max(0, cycles - 1) }, (_, i) => (
                    <option key={i + 1} value={i + 1}>
                      cleaning curve, base metal from cycle {i + 1}
                    </option>
                  ))}
                </SelectField>
                <TextField
                  label="Final mass (if no cycles were recorded)"
                  name="finalMassG"
                  inputMode="decimal"
                  unit="g"
                  value={text.finalMassG}
                  onChange={set("finalMassG")}
                  error={errors.finalMassG}
                />
              </div>
            </Card>
            <Card title="Pits">
              <TextField
                label="Deepest pit depths"
                name="pitDepthsMm"
                unit="mm"
                value={text.pitDepthsMm}
                onChange={set("pitDepthsMm")}
                placeholder="e.g. 0.12 0.09 0.07"
                hint="Separate depths with spaces or semicolons. Leave empty if no pits were measured."
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
          </Form>
          <Card title="Photos and lab sheet">
            <AttachmentDropzone
              exposureId={exposure.exposureId}
              attachments={attachments}
              locked={Boolean(exposure.locked)}
            />
          </Card>
        </div>
        <aside aria-live="polite" aria-label="Live preview" className="lg:sticky lg:top-4 lg:self-start">
          <Preview preview={preview} units={units} />
        </aside>
      </div>
    </div>
  );
}

function describeGeometry(g: CouponResultInput["geometry"]): string {
  switch (g.shape) {
    case "strip":
      return `strip ${g.lengthMm} × ${g.widthMm} × ${g.thicknessMm} mm${g.holeDiameterMm ? `, hole ⌀ ${g.holeDiameterMm} mm` : ""}`;
    case "disc":
      return `disc ⌀ ${g.diameterMm} × ${g.thicknessMm} mm${g.holeDiameterMm ? `, hole ⌀ ${g.holeDiameterMm} mm` : ""}`;
    case "rod":
      return `rod ⌀ ${g.diameterMm} × ${g.lengthMm} mm, ${g.exposedEnds} end(s) exposed`;
    default:
      return `flush disc ⌀ ${g.diameterMm} mm, one face wetted`;
  }
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
        {r.massLoss.blankLossG !== null ? (
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
