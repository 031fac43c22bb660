import { Form, Link, useNavigation } from "react-router";
import { Button } from "~/components/button";
import { FormAlert, SelectField, TextAreaField, TextField } from "~/components/field";
import { Card, Facts, PageHeader } from "~/components/layout";
import { formFailure } from "~/components/form-failure";
import { pointForWork, recordExchangeForm, stockForPoint } from "~/models/exposures.server";
import { MOUNTING_NAMES, SHAPE_NAMES, mountingTakes, type Mounting } from "~/services/coupon-fit";
import { db } from "~/services/db.server";
import { redirectWithFlash } from "~/services/flash.server";
import { requireUser, requireUuid } from "~/services/guards.server";
import { requestIdOf } from "~/services/problem.server";
import { formAction, pageLoad, readForm } from "~/services/respond.server";
import { materialName } from "~/services/coupon-spec";
import { formatLocal, toLocalInput } from "~/services/time";
import type { Route } from "./+types/pulls.$pointId.exchange";

async function load(args: Route.LoaderArgs | Route.ActionArgs) {
  const user = requireUser(args);
  const pointId = requireUuid(args.params.pointId);
  return { user, point: await pageLoad(() => pointForWork(db(), user, pointId)) };
}

export async function loader(args: Route.LoaderArgs) {
  const { point } = await load(args);
  const stock = await stockForPoint(db(), point);
  return { point, stock, now: toLocalInput(Date.now(), point.timeZone) };
}

export async function action(args: Route.ActionArgs) {
  const { user, point } = await load(args);
  const typed = await readForm(args.request);
  return formAction(typed, async () => {
    // Every field's problem comes back in one round: the form's own and the point's.
    const outcome = await recordExchangeForm(db(), user, point.id, typed, requestIdOf(args.context));
    const serial = typed.installSerial?.trim();
    if (outcome.removedExposureId) {
      return redirectWithFlash(`/lab/${outcome.removedExposureId}`, {
        tone: "ok",
        message: `Exchange at ${point.tag} recorded${outcome.installedExposureId ? ` and coupon ${serial} installed` : ""}. Enter the lab results when they come back.`,
      });
    }
    return redirectWithFlash("/pulls", {
      tone: "ok",
      message: `Coupon ${serial} installed at ${point.tag}.`,
    });
  });
}

export default function Exchange({ loaderData, actionData }: Route.ComponentProps) {
  const { point, stock, now } = loaderData;
  const form = formFailure(actionData);
  const errors = form.errors;
  const value = (name: string, fallback = "") => form.value(name) ?? fallback;
  const mountingWords = MOUNTING_NAMES[point.mounting as Mounting] ?? point.mounting;
  const shapeWords = (shape: string) => SHAPE_NAMES[shape as keyof typeof SHAPE_NAMES] ?? shape;
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
            ["Mounting", mountingWords],
            ["Planned exposure", `${point.plannedExposureDays} d`],
            [
              "In service",
              point.current
                ? `${point.current.couponSerial} (${materialName(point.current.materialCode)} ${shapeWords(point.current.shape)}), installed ${formatLocal(point.current.installedAt, point.timeZone)}`
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
          <Card
            title={`Remove ${point.current!.couponSerial} · ${materialName(point.current!.materialCode)} ${shapeWords(point.current!.shape)}`}
          >
            <div className="grid gap-4 sm:grid-cols-2">
              <TextField
                label="Removed at (site time)"
                name="removedAt"
                type="datetime-local"
                defaultValue={value("removedAt", now)}
                error={errors.removedAt}
                required
              />
              <SelectField
                label="Pitting visible as removed?"
                name="pittingVisible"
                defaultValue={value("pittingVisible")}
                error={errors.pittingVisible}
              >
                <option value="">Not recorded</option>
                <option value="yes">Yes, pits visible</option>
                <option value="no">No pitting seen</option>
              </SelectField>
              <TextField
                label="Deposits"
                name="deposits"
                defaultValue={value("deposits")}
                placeholder="e.g. thin black film, loose scale"
                error={errors.deposits}
              />
              <TextField
                label="Damage"
                name="damage"
                defaultValue={value("damage")}
                placeholder="e.g. bent during removal"
                error={errors.damage}
              />
            </div>
            <div className="mt-4">
              <TextAreaField label="Notes" name="notes" rows={2} defaultValue={value("notes")} error={errors.notes} />
            </div>
          </Card>
        ) : null}
        <Card title="Install the next coupon">
          {stock.fitting.length === 0 ? (
            <p className="text-sm" data-testid="no-fitting-stock">
              {stock.notFitting === 0
                ? "The owner has no coupons in stock: ask the owner's engineer to add some."
                : `None of the ${stock.notFitting} coupon${stock.notFitting === 1 ? "" : "s"} in the owner's stock fits this point, which is mounted ${mountingWords}. ${mountingTakes(point.mounting)} Ask the owner's engineer to add coupons that fit.`}
              {hasCurrent ? " You can still record the removal." : ""}
            </p>
          ) : (
            <div className="grid gap-4 sm:grid-cols-2">
              <SelectField
                label="Coupon serial"
                name="installSerial"
                defaultValue={value("installSerial")}
                error={errors.installSerial}
                hint={`${stock.fitting.length} coupon${stock.fitting.length === 1 ? "" : "s"} in the owner's stock fit this point. ${mountingTakes(point.mounting)}${stock.notFitting ? ` ${stock.notFitting} other${stock.notFitting === 1 ? "" : "s"} in stock do not fit and are not offered.` : ""}`}
              >
                <option value="">{hasCurrent ? "Leave the point empty" : "Choose a coupon"}</option>
                {stock.fitting.map((c) => (
                  <option key={c.serial} value={c.serial}>
                    {c.serial} · {materialName(c.materialCode)} · {shapeWords(c.shape)}
                  </option>
                ))}
              </SelectField>
              <TextField
                label="Installed at (site time)"
                name="installedAt"
                type="datetime-local"
                defaultValue={value("installedAt")}
                error={errors.installedAt}
              />
            </div>
          )}
          {stock.fitting.length === 0 && errors.installSerial ? (
            <p className="mt-2 text-xs font-medium text-bad" role="alert">
              {errors.installSerial}
            </p>
          ) : null}
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
