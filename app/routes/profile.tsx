import { data, Form, useNavigation } from "react-router";
import { z } from "zod";
import { Button } from "~/components/button";
import { Card, Facts, PageHeader } from "~/components/layout";
import { setOwnUnits } from "~/models/users.server";
import { db } from "~/services/db.server";
import { redirectWithFlash } from "~/services/flash.server";
import { requireUser } from "~/services/guards.server";
import { roleLabels } from "~/services/permissions";
import type { Route } from "./+types/profile";

const schema = z.object({ units: z.enum(["si", "us"], { error: "Choose SI or US customary units." }) });

export function loader(args: Route.LoaderArgs) {
  const user = requireUser(args);
  return {
    user: { email: user.email, name: user.name, role: user.role, units: user.units, organisation: user.organisation },
  };
}

export async function action(args: Route.ActionArgs) {
  const user = requireUser(args);
  const parsed = schema.safeParse(Object.fromEntries(await args.request.formData()));
  if (!parsed.success) return data({ errors: { units: parsed.error.issues[0]?.message } }, { status: 400 });
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
  const { user } = loaderData;
  const busy = useNavigation().state === "submitting";
  return (
    <div className="max-w-3xl space-y-6">
      <PageHeader title="Your profile" question="Who Wallcast thinks you are, and which units you read numbers in." />
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
          {actionData?.errors?.units ? <p className="text-xs text-bad">{actionData.errors.units}</p> : null}
          <p className="text-xs text-ink-faint">
            Calculations always run in SI; this only changes how numbers are shown. 1 mpy = 0.0254 mm/y exactly.
          </p>
          <Button type="submit" disabled={busy}>
            Save units
          </Button>
        </Form>
      </Card>
    </div>
  );
}

export const meta: Route.MetaFunction = () => [{ title: "Profile · Wallcast" }];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
