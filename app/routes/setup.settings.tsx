import { useEffect } from "react";
import { Form, useNavigation, useRevalidator } from "react-router";
import { SeverityBadge, StatusBadge } from "~/components/badges";
import { Button, ButtonLink } from "~/components/button";
import { CheckboxField, FormAlert, SelectField, StaleAlert, TextField } from "~/components/field";
import { Card, EngineeringCaution, PageHeader } from "~/components/layout";
import { formFailure, useFormKey } from "~/components/form-failure";
import {
  mpyToMmPerYear,
  SP0775_BANDS_MPY,
  type MaterialFamily,
  type RateKind,
  type SeverityThresholds,
} from "~/domain/index.ts";
import { actorOf } from "~/models/audit.server";
import { lifeRuns, requestLifeRecompute } from "~/models/circuit-life.server";
import {
  ownerSettings,
  ownerSettingsVersion,
  removeFamilyThreshold,
  saveFamilyThreshold,
  saveLifePolicy,
  saveOwnerSettings,
} from "~/models/owner-settings.server";
import { can } from "~/services/permissions";
import { formatLocal } from "~/services/time";
import { db } from "~/services/db.server";
import { redirectWithFlash } from "~/services/flash.server";
import { requireOwnerUser } from "~/services/guards.server";
import { requestIdOf } from "~/services/problem.server";
import { formAction, intentOf, readForm } from "~/services/respond.server";
import type { Route } from "./+types/setup.settings";

// The form is validated by settingsSchema in models/owner-settings.server.ts (saveOwnerSettings).

export async function loader(args: Route.LoaderArgs) {
  const user = requireOwnerUser(args, "setUpSites");
  const [settings, version, runs] = await Promise.all([
    ownerSettings(db(), user.ownerId),
    ownerSettingsVersion(db(), user.ownerId),
    lifeRuns(db(), user.ownerId),
  ]);
  return {
    version,
    life: {
      ratePolicy: settings.ratePolicy,
      minimumRateMmPerYear: settings.minimumRateMmPerYear,
      couponWindowYears: settings.couponWindowYears,
      couponRateBasis: settings.couponRateBasis,
      rateDisagreementFactor: settings.rateDisagreementFactor,
      maxIntervalYears: settings.maxIntervalYears,
    },
    runs,
    canRecompute: can(user, "recomputeLife"),
    timeZone: user.timeZone,
    general: settings.generalThresholds ?? null,
    pitting: settings.pittingThresholds ?? null,
    minimumExposureDays: settings.minimumExposureDays,
    photosRequired: settings.photosRequired,
    families: Object.entries(settings.familyThresholds).flatMap(([family, kinds]) =>
      (["general", "pitting"] as const).flatMap((kind) => {
        const t = kinds?.[kind];
        return t ? [{ family, kind, ...t }] : [];
      }),
    ),
  };
}

export async function action(args: Route.ActionArgs) {
  const user = requireOwnerUser(args, "setUpSites");
  const values = await readForm(args.request);
  const intent = intentOf(values, [
    "useDefaults",
    "saveSettings",
    "saveFamilyThreshold",
    "removeFamilyThreshold",
    "saveLifePolicy",
    "recomputeLife",
  ] as const);
  const requestId = requestIdOf(args.context);
  if (intent === "recomputeLife") {
    const engineer = requireOwnerUser(args, "recomputeLife");
    return formAction(values, async () => {
      await requestLifeRecompute(db(), engineer, values);
      return redirectWithFlash("/setup/settings#life", {
        tone: "ok",
        message: "Recompute queued: every circuit's remaining life is computed again; progress is shown below.",
      });
    });
  }
  return formAction(values, async () => {
    if (intent === "saveLifePolicy") {
      const r = await saveLifePolicy(db(), user.ownerId, actorOf(user), values, requestId);
      return redirectWithFlash("/setup/settings#life", {
        tone: "ok",
        message: r.changed
          ? "Rate policy saved. Every circuit's remaining life is being recomputed with it; earlier versions are kept."
          : "Nothing had changed.",
      });
    }
    if (intent === "saveFamilyThreshold" || intent === "removeFamilyThreshold") {
      const save = intent === "saveFamilyThreshold";
      const r = await (save ? saveFamilyThreshold : removeFamilyThreshold)(
        db(),
        user.ownerId,
        actorOf(user),
        values,
        requestId,
      );
      return redirectWithFlash("/setup/settings#families", {
        tone: "ok",
        message: save
          ? `Thresholds for ${familyWords[r.family]} (${r.kind}) saved; results computed from now on use them.`
          : `Thresholds for ${familyWords[r.family]} (${r.kind}) removed; such coupons are not graded from now on.`,
      });
    }
    if (intent === "useDefaults") {
      // Back to SP0775 for both kinds; the minimum exposure stays as it is.
      const current = await ownerSettings(db(), user.ownerId);
      await saveOwnerSettings(
        db(),
        user.ownerId,
        actorOf(user),
        {
          minimum_exposure_days: current.minimumExposureDays,
          photos_required: current.photosRequired ? "on" : "off",
          version: values.version,
        },
        requestId,
      );
      return redirectWithFlash("/setup/settings", {
        tone: "ok",
        message: "Rates are graded with the NACE SP0775 default bands again.",
      });
    }
    const r = await saveOwnerSettings(db(), user.ownerId, actorOf(user), values, requestId);
    return redirectWithFlash("/setup/settings", {
      tone: "ok",
      message: r.changed
        ? "Settings saved. Results computed from now on use them; results already stored keep the thresholds they were graded with."
        : "Nothing had changed.",
    });
  });
}

/** mm/y to at most 4 decimals, without trailing zeros. */
const mm = (v: number) => String(Number(v.toFixed(4)));

const defaultsMm = (kind: RateKind): SeverityThresholds => ({
  moderate: mpyToMmPerYear(SP0775_BANDS_MPY[kind].moderate),
  high: mpyToMmPerYear(SP0775_BANDS_MPY[kind].high),
  severe: mpyToMmPerYear(SP0775_BANDS_MPY[kind].severe),
});

const familyWords: Record<MaterialFamily, string> = {
  "carbon-steel": "carbon steel",
  "stainless-steel": "stainless steel",
  "copper-alloy": "copper alloys",
  "aluminium-alloy": "aluminium alloys",
  titanium: "titanium",
  "nickel-alloy": "nickel alloys",
  zinc: "zinc",
  lead: "lead",
};

const levels = [
  { key: "moderate", label: "Moderate from", words: "a rate at or above this is at least moderate" },
  { key: "high", label: "High from", words: "a rate at or above this is at least high" },
  { key: "severe", label: "Severe above", words: "a rate above this is severe" },
] as const;

const policyWords = {
  greater_of_long_short: "Greater of long- and short-term",
  regression_upper: "Regression, upper 95 % bound",
} as const;

const triggerWords = {
  button: "button",
  command: "command",
  policy: "rate policy changed",
  design: "design data changed",
  thresholds: "thresholds changed",
} as const;

const stateWords = { queued: "queued", running: "running", done: "done", failed: "failed" } as const;

/** Reloads the page every few seconds while a recompute is queued or running. */
function useRefreshWhile(active: boolean) {
  const { revalidate, state } = useRevalidator();
  useEffect(() => {
    if (!active) return;
    const timer = window.setInterval(() => {
      if (state === "idle") void revalidate();
    }, 3000);
    return () => window.clearInterval(timer);
  }, [active, revalidate, state]);
}

export default function Settings({ loaderData, actionData }: Route.ComponentProps) {
  const { general, pitting, minimumExposureDays, photosRequired, families, version, life, runs, canRecompute } =
    loaderData;
  const lifeForm = formFailure(actionData, { intent: "saveLifePolicy" });
  const recomputeForm = formFailure(actionData, { intent: "recomputeLife" });
  const lifeKey = useFormKey("life");
  const recomputeKey = useFormKey("recompute");
  const active = runs.some((r) => r.state === "queued" || r.state === "running");
  useRefreshWhile(active);
  const when = (iso: string | null) => (iso ? formatLocal(iso, loaderData.timeZone) : "—");
  const form = formFailure(actionData, { intent: "saveSettings" });
  const familyForm = formFailure(actionData, { intent: "saveFamilyThreshold" });
  // the remove buttons' fields are hidden: their problems are said at the top
  const removeForm = formFailure(actionData, { intent: "removeFamilyThreshold" });
  const familyKey = useFormKey("family");
  const errors = form.errors;
  const values = form.sent ? actionData?.values : undefined;
  const formKey = useFormKey();
  const busy = useNavigation().state === "submitting";
  const errorCount = Object.values(errors).filter(Boolean).length;
  const stored = { general, pitting };

  return (
    <div className="max-w-5xl space-y-6">
      <PageHeader
        title="Severity thresholds, minimum exposure and rate policy"
        question="From which corrosion rate is a result moderate, high or severe for your organisation, and how short may an exposure be before it is flagged?"
        actions={<ButtonLink to="/setup">Set-up</ButtonLink>}
      />

      <Card title="How rates are graded">
        <div className="max-w-prose space-y-2 text-sm text-ink-soft">
          <p>
            Every coupon result gets two grades — one for its general (uniform) corrosion rate and one for its pitting
            rate — each a word: low, moderate, high or severe. The worse of the two is highlighted.
          </p>
          <p>
            Unless you set your own, Wallcast uses the categories of NACE SP0775. Those bands are a convention for{" "}
            <strong>carbon steel in oil-production systems</strong>. Where your own procedures set other limits for
            carbon steel (water or other services), enter them below. Coupons of other materials (stainless steels,
            copper or nickel alloys…) are graded only with thresholds you set for their family further down.
          </p>
        </div>
      </Card>

      {removeForm.count > 0 ? (
        <FormAlert>Nothing was removed: {Object.values(removeForm.errors).filter(Boolean).join(" ")}</FormAlert>
      ) : null}
      {actionData?.conflict && actionData.errors.form ? (
        <StaleAlert message={actionData.errors.form} />
      ) : errorCount > 0 ? (
        <FormAlert>
          Nothing was saved: {errorCount === 1 ? "one field needs" : `${errorCount} fields need`} attention.
        </FormAlert>
      ) : null}

      <Form method="post" noValidate className="space-y-6" key={formKey}>
        <input type="hidden" name="intent" value="saveSettings" />
        <input type="hidden" name="version" value={version} />
        <div className="grid gap-6 md:grid-cols-2">
          {(["general", "pitting"] as const).map((kind) => {
            const defaults = defaultsMm(kind);
            const own = stored[kind];
            const applied = own ?? defaults;
            return (
              <Card key={kind} title={kind === "general" ? "General corrosion rate" : "Pitting rate"}>
                <fieldset className="space-y-4">
                  <legend className="text-sm text-ink-soft">
                    {own ? "Your own thresholds are in force." : "The SP0775 defaults are in force."} Leave all three
                    empty for the defaults.
                  </legend>
                  {levels.map((l) => {
                    const name = `${kind}_${l.key}`;
                    const d = defaults[l.key];
                    return (
                      <TextField
                        key={name}
                        label={l.label}
                        name={name}
                        inputMode="decimal"
                        unit="mm/y"
                        placeholder={mm(d)}
                        defaultValue={values ? values[name] : own ? mm(own[l.key]) : ""}
                        error={errors[name]}
                        hint={`SP0775 default ${mm(d)} mm/y (${SP0775_BANDS_MPY[kind][l.key]} mpy); ${l.words}.`}
                        autoComplete="off"
                      />
                    );
                  })}
                </fieldset>
                <div className="mt-4 rounded-md border border-rule bg-paper px-3 py-2 text-xs">
                  <p className="mb-1.5 font-medium text-ink-soft">Bands in force</p>
                  <ul className="num space-y-1">
                    <li className="flex items-center gap-2">
                      <SeverityBadge value="low" /> below {mm(applied.moderate)} mm/y
                    </li>
                    <li className="flex items-center gap-2">
                      <SeverityBadge value="moderate" /> {mm(applied.moderate)} to below {mm(applied.high)} mm/y
                    </li>
                    <li className="flex items-center gap-2">
                      <SeverityBadge value="high" /> {mm(applied.high)} to {mm(applied.severe)} mm/y
                    </li>
                    <li className="flex items-center gap-2">
                      <SeverityBadge value="severe" /> above {mm(applied.severe)} mm/y
                    </li>
                  </ul>
                  <p className="mt-1.5 text-ink-faint">
                    {own ? "Your own thresholds" : SP0775_BANDS_MPY[kind].source.replace(/ \[\w+\]$/, "")}; 1 mpy =
                    0.0254 mm/y.
                  </p>
                </div>
              </Card>
            );
          })}
        </div>

        <Card title="Minimum exposure">
          <div className="max-w-sm">
            <TextField
              label="Shortest exposure without a flag"
              name="minimum_exposure_days"
              inputMode="numeric"
              unit="days"
              defaultValue={values ? values.minimum_exposure_days : String(minimumExposureDays)}
              error={errors.minimum_exposure_days}
              hint="1 to 365; default 30. A coupon pulled sooner gets an “exposure too short” flag for the reviewer."
            />
          </div>
        </Card>

        <Card title="Photos">
          <input type="hidden" name="photos_required" value="off" />
          <CheckboxField
            name="photos_required"
            value="on"
            defaultChecked={(values ? values.photos_required : photosRequired ? "on" : "off") === "on"}
            error={errors.photos_required}
            label="Ask for a photo of every coupon"
          />
          <p className="mt-2 text-xs text-ink-faint">
            When ticked, a coupon submitted without a photo carries a “no photo” warning that the engineer must
            acknowledge with a reason before approving.
          </p>
        </Card>

        <div className="flex flex-wrap items-center gap-3">
          <Button type="submit" disabled={busy}>
            Save settings
          </Button>
          <p className="text-xs text-ink-faint">
            Stored results keep the grades they were computed with; new results use these.
          </p>
        </div>
      </Form>

      {general || pitting ? (
        <Form method="post">
          <input type="hidden" name="intent" value="useDefaults" />
          <input type="hidden" name="version" value={version} />
          <Button type="submit" variant="secondary" disabled={busy}>
            Go back to the SP0775 defaults for both
          </Button>
        </Form>
      ) : null}

      <Card title="Thresholds for other materials">
        <div id="families" className="space-y-4">
          <p className="text-sm text-ink-soft">
            The SP0775 bands are a carbon-steel convention for oilfield service. Coupons of other materials are graded
            only with thresholds you set here for their family; without them the rate is shown as &ldquo;not graded: no
            thresholds for this material&rdquo;.
          </p>
          {families.length === 0 ? (
            <p className="text-sm">No thresholds set for other materials yet.</p>
          ) : (
            <ul className="space-y-2 text-sm">
              {families.map((f) => (
                <li key={`${f.family}-${f.kind}`} className="flex flex-wrap items-center gap-3">
                  <span className="font-medium">
                    {familyWords[f.family as MaterialFamily] ?? f.family}, {f.kind}
                  </span>
                  <span className="num">
                    moderate from {mm(f.moderate)} · high from {mm(f.high)} · severe above {mm(f.severe)} mm/y
                  </span>
                  <Form method="post">
                    <input type="hidden" name="intent" value="removeFamilyThreshold" />
                    <input type="hidden" name="family" value={f.family} />
                    <input type="hidden" name="kind" value={f.kind} />
                    <Button type="submit" variant="secondary" disabled={busy}>
                      Remove
                    </Button>
                  </Form>
                </li>
              ))}
            </ul>
          )}
          <Form method="post" noValidate className="grid gap-3 sm:grid-cols-2 lg:grid-cols-5" key={familyKey}>
            <input type="hidden" name="intent" value="saveFamilyThreshold" />
            <SelectField
              label="Material family"
              name="family"
              defaultValue={familyForm.value("family", "stainless-steel")}
              error={familyForm.errors.family}
            >
              {Object.entries(familyWords)
                .filter(([k]) => k !== "carbon-steel")
                .map(([k, w]) => (
                  <option key={k} value={k}>
                    {w}
                  </option>
                ))}
            </SelectField>
            <SelectField
              label="Rate"
              name="kind"
              defaultValue={familyForm.value("kind", "general")}
              error={familyForm.errors.kind}
            >
              <option value="general">general</option>
              <option value="pitting">pitting</option>
            </SelectField>
            {levels.map((l) => (
              <TextField
                key={l.key}
                label={l.label}
                name={l.key}
                unit="mm/y"
                inputMode="decimal"
                defaultValue={familyForm.value(l.key)}
                error={familyForm.errors[l.key]}
              />
            ))}
            <div className="sm:col-span-2 lg:col-span-5">
              <Button type="submit" disabled={busy}>
                Save thresholds for this family
              </Button>
            </div>
          </Form>
        </div>
      </Card>

      <Card title="Remaining life">
        <div id="life" className="space-y-5">
          <p className="max-w-prose text-sm text-ink-soft">
            How each CML's corrosion rate is chosen for its remaining life and next thickness inspection (API 570).
            Saving a change recomputes every circuit; each computation is kept as a new version.
          </p>
          {lifeForm.count > 0 ? (
            <FormAlert>
              Nothing was saved: {lifeForm.count === 1 ? "one field needs" : `${lifeForm.count} fields need`} attention.
            </FormAlert>
          ) : null}
          <Form method="post" noValidate className="grid gap-4 md:grid-cols-2" key={lifeKey}>
            <input type="hidden" name="intent" value="saveLifePolicy" />
            <input type="hidden" name="version" value={version} />
            <div className="md:col-span-2">
              <SelectField
                label="Governing rate"
                name="rate_policy"
                defaultValue={lifeForm.value("rate_policy", life.ratePolicy)}
                error={lifeForm.errors.rate_policy}
                hint="API 570 long-term and short-term rates, or the upper bound of the least-squares rate over all readings (three or more; with fewer, the greater of the two)."
              >
                {Object.entries(policyWords).map(([k, w]) => (
                  <option key={k} value={k}>
                    {w}
                  </option>
                ))}
              </SelectField>
            </div>
            <TextField
              label="Stated minimum rate"
              name="minimum_rate_mm_y"
              inputMode="decimal"
              unit="mm/y"
              defaultValue={lifeForm.value("minimum_rate_mm_y", life.minimumRateMmPerYear?.toString() ?? "")}
              error={lifeForm.errors.minimum_rate_mm_y}
              hint="Optional. A floor under every governing rate, so a CML showing no loss or growth still has a finite life. Empty: no loss gives no remaining life."
              autoComplete="off"
            />
            <TextField
              label="Owner's maximum interval"
              name="max_interval_years"
              inputMode="decimal"
              unit="years"
              defaultValue={lifeForm.value("max_interval_years", life.maxIntervalYears?.toString() ?? "")}
              error={lifeForm.errors.max_interval_years}
              hint="Optional, up to 20. Only ever shortens the class maximum (class 1: 5 y, classes 2 and 3: 10 y, injection points 3 y); class 4 needs it for a date when no loss is measured."
              autoComplete="off"
            />
            <TextField
              label="Coupon window"
              name="coupon_window_years"
              inputMode="decimal"
              unit="years"
              defaultValue={lifeForm.value("coupon_window_years", String(life.couponWindowYears))}
              error={lifeForm.errors.coupon_window_years}
              hint="Approved coupon results of the circuit's material removed within this many years count; default 2."
              autoComplete="off"
            />
            <SelectField
              label="Coupon rate for estimates"
              name="coupon_rate_basis"
              defaultValue={lifeForm.value("coupon_rate_basis", life.couponRateBasis)}
              error={lifeForm.errors.coupon_rate_basis}
            >
              <option value="general">general corrosion rate</option>
              <option value="pitting">pitting rate</option>
            </SelectField>
            <TextField
              label="Disagreement factor"
              name="rate_disagreement_factor"
              inputMode="decimal"
              unit="×"
              defaultValue={lifeForm.value("rate_disagreement_factor", String(life.rateDisagreementFactor))}
              error={lifeForm.errors.rate_disagreement_factor}
              hint="Coupon and thickness rates further apart than this are flagged; more than 1, default 2."
              autoComplete="off"
            />
            <div className="md:col-span-2">
              <Button type="submit" disabled={busy}>
                Save the rate policy
              </Button>
            </div>
          </Form>

          {canRecompute ? (
            <Form method="post" noValidate className="flex flex-wrap items-end gap-3" key={recomputeKey}>
              <input type="hidden" name="intent" value="recomputeLife" />
              <div className="w-full sm:w-96">
                <TextField
                  label="Reason for recomputing"
                  name="reason"
                  defaultValue={recomputeForm.value("reason")}
                  error={recomputeForm.errors.reason}
                  hint="Kept in the audit trail with the counts."
                  autoComplete="off"
                />
              </div>
              <Button type="submit" variant="secondary" disabled={busy || active}>
                Recompute remaining life
              </Button>
            </Form>
          ) : (
            <p className="text-sm text-ink-soft">Integrity engineers can recompute every circuit from here.</p>
          )}

          <div>
            <h3 className="text-sm font-medium">Latest recomputes</h3>
            {runs.length === 0 ? (
              <p className="mt-1 text-sm text-ink-soft">None yet.</p>
            ) : (
              <ul className="mt-2 space-y-2 text-sm" aria-live="polite">
                {runs.map((r) => (
                  <li key={r.id} className="rounded-md border border-rule px-3 py-2">
                    <div className="flex flex-wrap items-center gap-x-3 gap-y-1">
                      <StatusBadge status={r.state} label={stateWords[r.state]} />
                      <span className="num">
                        {r.circuits_done} of {r.circuits_total ?? "…"} circuits
                      </span>
                      <span className="text-ink-soft">
                        {triggerWords[r.trigger]}
                        {r.requested_by_name ? ` by ${r.requested_by_name}` : ""}
                      </span>
                    </div>
                    <p className="mt-1 break-words text-ink-soft">{r.reason}</p>
                    <p className="mt-1 text-xs text-ink-faint">
                      queued {when(r.created_at)}
                      {r.finished_at ? ` · finished ${when(r.finished_at)}` : ""}
                      {r.error ? ` · ${r.error}` : ""}
                    </p>
                  </li>
                ))}
              </ul>
            )}
          </div>
        </div>
      </Card>

      <EngineeringCaution compact />
    </div>
  );
}

export const meta: Route.MetaFunction = () => [{ title: "Thresholds, exposure and rate policy · Set-up · Wallcast" }];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
