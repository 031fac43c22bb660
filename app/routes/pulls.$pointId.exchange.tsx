import { Form, Link, useNavigation } from "react-router";
import { z } from "zod";
import { Button } from "~/components/button";
import { FormAlert, SelectField, TextAreaField, TextField } from "~/components/field";
import { Card, Facts, PageHeader } from "~/components/layout";
import { couponsInStock, pointForWork, recordExchange } from "~/models/exposures.server";
import { fieldErrorsOf } from "~/services/outcome";
import { db } from "~/services/db.server";
import { redirectWithFlash } from "~/services/flash.server";
import { requireUser, requireUuid } from "~/services/guards.server";
import { requestIdOf } from "~/services/problem.server";
import { formAction, invalidForm, pageLoad, readForm } from "~/services/respond.server";
import { materialName } from "~/services/coupon-spec";
import { formatLocal, readLocalInput, toLocalInput } from "~/services/time";
import type { Route } from "./+types/pulls.$pointId.exchange";

const schema = z.object({
  removedAt: z.string().trim().optional().default(""),
  deposits: z.string().trim().max(500, "Keep deposits under 500 characters.").optional().default(""),
  pittingVisible: z.enum(["", "yes", "no"]).optional().default(""),
  damage: z.string().trim().max(500, "Keep damage under 500 characters.").optional().default(""),
  notes: z.string().trim().max(2000, "Keep notes under 2000 characters.").optional().default(""),
  installSerial: z.string().trim().max(60).optional().default(""),
  installedAt: z.string().trim().optional().default(""),
});

async function load(args: Route.LoaderArgs | Route.ActionArgs) {
  const user = requireUser(args);
  const pointId = requireUuid(args.params.pointId);
  return { user, point: await pageLoad(() => pointForWork(db(), user, pointId)) };
}

export async function loader(args: Route.LoaderArgs) {
  const { point } = await load(args);
  const stock = await couponsInStock(db(), point.ownerId);
  return { point, stock, now: toLocalInput(Date.now(), point.timeZone) };
}

export async function action(args: Route.ActionArgs) {
  const { user, point } = await load(args);
  const typed = await readForm(args.request);
  const parsed = schema.safeParse(typed);
  if (!parsed.success) return invalidForm(typed, fieldErrorsOf(parsed.error));
  const values = parsed.data;
  const errors: Record<string, string> = {};
  // Wall times at the site; a time in the hour skipped by a clock change is refused in words.
  const removal = values.removedAt ? readLocalInput(values.removedAt, point.timeZone) : null;
  if (removal && !removal.ok) errors.removedAt = removal.message;
  const removedAt = removal?.ok ? removal.instant : null;
  const installation = values.installedAt ? readLocalInput(values.installedAt, point.timeZone) : null;
  if (installation && !installation.ok) errors.installedAt = installation.message;
  const installedAt = installation?.ok ? installation.instant : null;
  if (values.installSerial && !values.installedAt) errors.installedAt = "Enter when the new coupon went in.";
  if (!values.installSerial && values.installedAt) errors.installSerial = "Choose the coupon that went in.";
  if (Object.keys(errors).length) return invalidForm(typed, errors);

  return formAction(typed, async () => {
    const outcome = await recordExchange(
      db(),
      user,
      point.id,
      {
        removedAt,
        deposits: values.deposits,
        pittingVisible: values.pittingVisible === "" ? null : values.pittingVisible === "yes",
        damage: values.damage,
        notes: values.notes,
        installSerial: values.installSerial || null,
        installedAt,
      },
      requestIdOf(args.context),
    );
    if (outcome.removedExposureId) {
      return redirectWithFlash(`/lab/${outcome.removedExposureId}`, {
        tone: "ok",
        message: `Exchange at ${point.tag} recorded${outcome.installedExposureId ? ` and coupon ${values.installSerial} installed` : ""}. Enter the lab results when they come back.`,
      });
    }
    return redirectWithFlash("/pulls", {
      tone: "ok",
      message: `Coupon ${values.installSerial} installed at ${point.tag}.`,
    });
  });
}

export default function Exchange({ loaderData, actionData }: Route.ComponentProps) {
  const { point, stock, now } = loaderData;
  const errors: Record<string, string | undefined> = actionData?.errors ?? {};
  const values: Partial<Record<string, string>> = actionData?.values ?? {};
  const busy = useNavigation().state === "submitting";
  const hasCurrent = Boolean(point.current);
  return (
    <div className="max-w-4xl space-y-6">
      <PageHeader
        title={`${hasCurrent ? "Coupon exchange" : "First coupon"} at ${point.tag}`}
        question={
          hasCurrent
            ? "Take out the coupon in service and, in the same record, put in the next one."
            : "This point has no coupon in service: record the one you installed."
        }
        actions={<Link to="/pulls">Back to the pull schedule</Link>}
      />
      <Card title="The point">
        <Facts
          items={[
            ["Site", `${point.siteName} (times in ${point.timeZone})`],
            ["Circuit", point.circuitTag],
            ["Access fitting", point.accessFitting || "—"],
            ["Orientation", point.orientation || "—"],
            ["Mounting", point.mounting],
            ["Planned exposure", `${point.plannedExposureDays} d`],
            [
              "In service",
              point.current
                ? `${point.current.couponSerial}, installed ${formatLocal(point.current.installedAt, point.timeZone)}`
                : "none",
            ],
          ]}
        />
      </Card>
      <Form method="post" className="space-y-6" noValidate>
        {errors.form ? <FormAlert>{errors.form}</FormAlert> : null}
        {Object.keys(errors).length > 0 && !errors.form ? (
          <FormAlert>Nothing was saved: correct the fields marked below.</FormAlert>
        ) : null}
        {hasCurrent ? (
          <Card title={`Remove ${point.current!.couponSerial}`}>
            <div className="grid gap-4 sm:grid-cols-2">
              <TextField
                label="Removed at (site time)"
                name="removedAt"
                type="datetime-local"
                defaultValue={values.removedAt ?? now}
                error={errors.removedAt}
                required
              />
              <SelectField
                label="Pitting visible as removed?"
                name="pittingVisible"
                defaultValue={values.pittingVisible ?? ""}
              >
                <option value="">Not recorded</option>
                <option value="yes">Yes, pits visible</option>
                <option value="no">No pitting seen</option>
              </SelectField>
              <TextField
                label="Deposits"
                name="deposits"
                defaultValue={values.deposits ?? ""}
                placeholder="e.g. thin black film, loose scale"
                error={errors.deposits}
              />
              <TextField
                label="Damage"
                name="damage"
                defaultValue={values.damage ?? ""}
                placeholder="e.g. bent during removal"
                error={errors.damage}
              />
            </div>
            <div className="mt-4">
              <TextAreaField
                label="Notes"
                name="notes"
                rows={2}
                defaultValue={values.notes ?? ""}
                error={errors.notes}
              />
            </div>
          </Card>
        ) : null}
        <Card title="Install the next coupon">
          <div className="grid gap-4 sm:grid-cols-2">
            <SelectField
              label="Coupon serial"
              name="installSerial"
              defaultValue={values.installSerial ?? ""}
              error={errors.installSerial}
              hint={
                stock.length === 0
                  ? "The owner has no coupons in stock: ask the owner's engineer to add some."
                  : `${stock.length} coupons in the owner's stock.`
              }
            >
              <option value="">{hasCurrent ? "Leave the point empty" : "Choose a coupon"}</option>
              {stock.map((c) => (
                <option key={c.serial} value={c.serial}>
                  {c.serial} · {materialName(c.materialCode)} · {c.shape}
                </option>
              ))}
            </SelectField>
            <TextField
              label="Installed at (site time)"
              name="installedAt"
              type="datetime-local"
              defaultValue={values.installedAt ?? ""}
              error={errors.installedAt}
            />
          </div>
        </Card>
        <div className="flex gap-3">
          <Button type="submit" disabled={busy}>
            {busy ? "Saving…" : hasCurrent ? "Record exchange" : "Record installation"}
          </Button>
        </div>
      </Form>
    </div>
  );
}

export const meta: Route.MetaFunction = ({ data }) => [{ title: `Exchange ${data?.point.tag ?? ""} · Wallcast` }];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
