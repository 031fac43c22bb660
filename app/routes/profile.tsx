import { Form, useNavigation } from "react-router";
import { z } from "zod";
import { Button } from "~/components/button";
import { SelectField } from "~/components/field";
import { formFailure } from "~/components/form-failure";
import { Card, Facts, PageHeader } from "~/components/layout";
import { canonicalTimeZone, timeZoneNames } from "~/models/sites.server";
import { setOwnTimeZone, setOwnUnits } from "~/models/users.server";
import { db } from "~/services/db.server";
import { redirectWithFlash } from "~/services/flash.server";
import { requireUser } from "~/services/guards.server";
import { formatLocal } from "~/services/time";
import { roleLabels } from "~/services/permissions";
import { intentOf, invalidForm, readForm } from "~/services/respond.server";
import type { Route } from "./+types/profile";

const unitsSchema = z.object({ units: z.enum(["si", "us"], { error: "Choose SI or US customary units." }) });

export function loader(args: Route.LoaderArgs) {
  const user = requireUser(args);
  return {
    user: {
      email: user.email,
      name: user.name,
      role: user.role,
      units: user.units,
      organisation: user.organisation,
      timeZone: user.timeZone,
      timeZoneChosen: user.timeZoneChosen,
    },
    zones: timeZoneNames(),
    now: new Date().toISOString(),
  };
}

export async function action(args: Route.ActionArgs) {
  const user = requireUser(args);
  const values = await readForm(args.request);
  const intent = intentOf(values, ["units", "timeZone"] as const);
  if (intent === "timeZone") {
    const given = (values.timeZone ?? "").trim();
    const zone = given === "" ? null : canonicalTimeZone(given);
    if (zone === undefined) return invalidForm(values, { timeZone: "Choose a time zone from the list." });
    await setOwnTimeZone(db(), user.id, user.organisation.id, zone);
    return redirectWithFlash("/profile", {
      tone: "ok",
      message: zone
        ? `The audit trail and the people list now show times in ${zone}.`
        : "The audit trail and the people list now show times in your organisation’s default zone.",
    });
  }
  const parsed = unitsSchema.safeParse(values);
  if (!parsed.success) return invalidForm(values, { units: parsed.error.issues[0]?.message ?? "Choose units." });
  await setOwnUnits(db(), user.id, user.organisation.id, parsed.data.units);
  return redirectWithFlash("/profile", {
    tone: "ok",
    message:
      parsed.data.units === "si"
        ? "Screens and reports now show SI units."
        : "Screens and reports now show US customary units.",
  });
}

export default function Profile({ loaderData, actionData }: Route.ComponentProps) {
  const { user, zones, now } = loaderData;
  const busy = useNavigation().state === "submitting";
  const unitsFailure = formFailure(actionData, { intent: "units" });
  const zoneFailure = formFailure(actionData, { intent: "timeZone" });
  return (
    <div className="max-w-3xl space-y-6">
      <PageHeader title="Your profile" question="Who Wallcast thinks you are, and how you read numbers and times." />
      <Card title="Account">
        <Facts
          items={[
            ["Name", user.name || "—"],
            ["E-mail", user.email],
            ["Organisation", `${user.organisation.name} (${user.organisation.kind})`],
            ["Role", roleLabels[user.role]],
          ]}
        />
        <p className="mt-3 text-xs text-ink-faint">
          Your name and e-mail come from your identity provider; your organisation and role are set by your
          administrator.
        </p>
      </Card>
      <Card title="Display units">
        <Form method="post" className="space-y-3">
          <input type="hidden" name="intent" value="units" />
          <fieldset>
            <legend className="sr-only">Display units</legend>
            {(
              [
                ["si", "SI", "corrosion rates in mm/y, thickness in mm, pressure in MPa"],
                ["us", "US customary", "corrosion rates in mpy (mils per year), thickness in inches, pressure in psi"],
              ] as const
            ).map(([value, label, hint]) => (
              <label key={value} className="flex items-start gap-2 py-1 text-sm">
                <input
                  type="radio"
                  name="units"
                  value={value}
                  defaultChecked={user.units === value}
                  className="mt-1 accent-tide-700"
                />
                <span>
                  <span className="font-medium">{label}</span> <span className="text-ink-soft">— {hint}</span>
                </span>
              </label>
            ))}
          </fieldset>
          {unitsFailure.errors.units ? (
            <p className="text-xs text-bad" role="alert">
              {unitsFailure.errors.units}
            </p>
          ) : null}
          <p className="text-xs text-ink-faint">
            Calculations always run in SI; this only changes how numbers are shown. 1 mpy = 0.0254 mm/y exactly.
          </p>
          <Button type="submit" disabled={busy}>
            Save units
          </Button>
        </Form>
      </Card>
      <Card title="Time zone">
        <Form method="post" className="space-y-3">
          <input type="hidden" name="intent" value="timeZone" />
          <p className="text-sm text-ink-soft">
            A site’s records — pulls, lab results, submissions and their decisions — are always shown in that site’s own
            time zone. Pages that span your organisation, the audit trail and the people list, use the zone chosen here.
          </p>
          <div className="max-w-sm">
            <SelectField
              label="Zone for organisation-wide pages"
              name="timeZone"
              defaultValue={user.timeZoneChosen ? user.timeZone : ""}
              error={zoneFailure.errors.timeZone}
              hint={`Now ${formatLocal(now, user.timeZone)} in ${user.timeZone}${user.timeZoneChosen ? "" : " (the default)"}.`}
            >
              <option value="">Default — your organisation’s first site, or UTC</option>
              {zones.map((z) => (
                <option key={z} value={z}>
                  {z}
                </option>
              ))}
            </SelectField>
          </div>
          <Button type="submit" disabled={busy}>
            Save time zone
          </Button>
        </Form>
      </Card>
    </div>
  );
}

export const meta: Route.MetaFunction = () => [{ title: "Profile · Wallcast" }];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
