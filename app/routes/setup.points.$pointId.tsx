import { createColumnHelper } from "@tanstack/react-table";
import { Form, useNavigation } from "react-router";
import { StatusBadge } from "~/components/badges";
import { Button, ButtonLink } from "~/components/button";
import { DataTable } from "~/components/data-table";
import { CheckboxField, FormAlert, SelectField, TextField } from "~/components/field";
import { Card, EmptyState, Facts, PageHeader } from "~/components/layout";
import { formFailure, useFormKey } from "~/components/form-failure";
import { MATERIALS } from "~/domain/index.ts";
import { actorOf } from "~/models/audit.server";
import { listCircuits } from "~/models/circuits.server";
import { getPoint, pointAudit, updatePoint } from "~/models/monitoring-points.server";
import { db } from "~/services/db.server";
import { DUE_RULE } from "~/services/coupon-rules";
import { redirectWithFlash } from "~/services/flash.server";
import { notFound, requireOwnerUser, requireUuid } from "~/services/guards.server";
import { requestIdOf } from "~/services/problem.server";
import { formAction, intentOf, readForm } from "~/services/respond.server";
import { auditActionWords } from "~/services/audit-words";
import { formatLocal } from "~/services/time";
import type { Route } from "./+types/setup.points.$pointId";

// The form is validated by pointSchema in models/monitoring-points.server.ts (updatePoint).

export async function loader(args: Route.LoaderArgs) {
  const user = requireOwnerUser(args, "setUpSites");
  const pointId = requireUuid(args.params.pointId);
  const point = await getPoint(db(), user.ownerId, pointId);
  if (!point) notFound();
  const [circuits, trail] = await Promise.all([
    listCircuits(db(), user.ownerId, point.site_id),
    pointAudit(db(), user.ownerId, pointId),
  ]);
  return {
    point: {
      ...point,
      installed_at: point.installed_at ? new Date(point.installed_at).toISOString() : null,
      created_at: new Date(point.created_at).toISOString(),
      updated_at: new Date(point.updated_at).toISOString(),
    },
    circuits: circuits.map((c) => ({ id: c.id, tag: c.tag, unit_tag: c.unit_tag, service: c.service })),
    trail: trail.map((e) => ({
      id: e.id,
      at: new Date(e.created_at).toISOString(),
      who: e.actor_label,
      action: e.action,
      before: (e.before ?? null) as Record<string, unknown> | null,
      after: (e.after ?? null) as Record<string, unknown> | null,
      reason: e.reason,
    })),
  };
}

export async function action(args: Route.ActionArgs) {
  const user = requireOwnerUser(args, "setUpSites");
  const pointId = requireUuid(args.params.pointId);
  // Another owner's point is a 404 whatever the form says.
  if (!(await getPoint(db(), user.ownerId, pointId))) notFound();
  const values = await readForm(args.request);
  intentOf(values, ["updatePoint"] as const);
  return formAction(values, async () => {
    const r = await updatePoint(db(), user.ownerId, actorOf(user), pointId, values, requestIdOf(args.context));
    return redirectWithFlash(`/setup/points/${pointId}`, {
      tone: "ok",
      message: r.changed
        ? `Point ${values.tag.trim()} saved; the change is in its history below.`
        : "Nothing had changed; the point is as it was.",
    });
  });
}

type Loader = Route.ComponentProps["loaderData"];
type TrailRow = Loader["trail"][number];

const fieldWords: Record<string, string> = {
  circuit_id: "circuit",
  tag: "tag",
  access_fitting: "access fitting",
  orientation: "orientation",
  mounting: "mounting",
  planned_exposure_days: "planned exposure",
  active: "in use",
  site_id: "site",
};

export default function PointSetup({ loaderData, actionData }: Route.ComponentProps) {
  const { point, circuits, trail } = loaderData;
  const form = formFailure(actionData);
  const errors = form.errors;
  const values = form.sent ? actionData?.values : undefined;
  const formKey = useFormKey(point.updated_at);
  const busy = useNavigation().state === "submitting";
  const errorCount = Object.values(errors).filter(Boolean).length;
  const tz = point.site_time_zone;
  const circuitTag = (id: unknown) => circuits.find((c) => c.id === id)?.tag ?? "another circuit";

  const show = (field: string, v: unknown): string => {
    if (v === null || v === undefined || v === "") return "—";
    if (field === "circuit_id") return circuitTag(v);
    if (field === "site_id") return point.site_code;
    if (field === "planned_exposure_days") return `${v} days`;
    if (field === "active") return v ? "yes" : "no";
    return String(v);
  };

  const changes = (e: TrailRow): string => {
    if (!e.before && e.after)
      return Object.entries(e.after)
        .filter(([k]) => k !== "site_id")
        .map(([k, v]) => `${fieldWords[k] ?? k}: ${show(k, v)}`)
        .join("; ");
    if (e.before && e.after) {
      const diff = Object.keys(e.after)
        .filter((k) => JSON.stringify(e.before?.[k]) !== JSON.stringify(e.after?.[k]))
        .map((k) => `${fieldWords[k] ?? k}: ${show(k, e.before?.[k])} → ${show(k, e.after?.[k])}`);
      return diff.join("; ") || "no field changed";
    }
    return "—";
  };

  const trailColumns = [
    trailCol.accessor("at", {
      header: `When (${tz})`,
      cell: (c) => <span className="num whitespace-nowrap">{formatLocal(c.getValue(), tz)}</span>,
    }),
    trailCol.accessor("who", { header: "Who" }),
    trailCol.accessor((r) => auditActionWords(r.action), { id: "action", header: "What" }),
    trailCol.accessor((r) => changes(r), { id: "changes", header: "Changes", enableSorting: false }),
  ];

  const material = MATERIALS.find((m) => m.key === point.material_code);

  return (
    <div className="space-y-6">
      <PageHeader
        title={
          <>
            Point {point.tag} <span className="text-ink-faint">· {point.site_code}</span>
          </>
        }
        question="Where is this coupon position, how long should each coupon stay in, and who changed it?"
        actions={
          <>
            <ButtonLink to={`/setup/sites/${point.site_id}#points`}>Back to {point.site_name}</ButtonLink>
          </>
        }
      />

      <div className="grid gap-6 lg:grid-cols-[minmax(0,2fr)_minmax(0,1fr)]">
        <Card title="Edit the point">
          {errorCount > 0 ? (
            <div className="mb-3">
              <FormAlert>
                Nothing was saved: {errorCount === 1 ? "one field needs" : `${errorCount} fields need`} attention.
              </FormAlert>
            </div>
          ) : null}
          <Form method="post" noValidate className="space-y-4" key={formKey}>
            <input type="hidden" name="intent" value="updatePoint" />
            <div className="grid gap-4 sm:grid-cols-2">
              <TextField
                label="Point tag"
                name="tag"
                defaultValue={values?.tag ?? point.tag}
                error={errors.tag}
                hint="Unique across all your sites"
                autoComplete="off"
              />
              <SelectField
                label="Circuit"
                name="circuit_id"
                defaultValue={values?.circuit_id ?? point.circuit_id}
                error={errors.circuit_id}
                hint="A point stays at its site."
              >
                {circuits.map((c) => (
                  <option key={c.id} value={c.id}>
                    {c.tag} (unit {c.unit_tag}){c.service ? ` — ${c.service}` : ""}
                  </option>
                ))}
              </SelectField>
              <TextField
                label="Access fitting"
                name="access_fitting"
                defaultValue={values?.access_fitting ?? point.access_fitting}
                error={errors.access_fitting}
                hint="Type or number, e.g. 2-in HP fitting AF-12"
              />
              <TextField
                label="Orientation"
                name="orientation"
                defaultValue={values?.orientation ?? point.orientation}
                error={errors.orientation}
                hint="e.g. bottom of line, 6 o'clock"
              />
              <SelectField
                label="Mounting"
                name="mounting"
                defaultValue={values?.mounting ?? point.mounting}
                error={errors.mounting}
              >
                <option value="flush">Flush with the pipe wall</option>
                <option value="intrusive">Intrusive (into the flow)</option>
              </SelectField>
              <TextField
                label="Planned exposure"
                name="planned_exposure_days"
                inputMode="numeric"
                unit="days"
                defaultValue={values?.planned_exposure_days ?? String(point.planned_exposure_days)}
                error={errors.planned_exposure_days}
                hint={`7 to 730 days. ${DUE_RULE}`}
              />
            </div>
            <input type="hidden" name="active" value="off" />
            <CheckboxField
              label="In use: the point is on the contractors’ pull schedule"
              name="active"
              defaultChecked={values ? values.active === "on" : point.active}
              error={errors.active}
            />
            <p className="text-xs text-ink-faint">
              Taking a point out of use keeps its history; a coupon still in it stays on record until it is pulled.
            </p>
            <Button type="submit" disabled={busy}>
              Save point
            </Button>
          </Form>
        </Card>

        <Card title="Where it is">
          <Facts
            items={[
              ["Site", `${point.site_name} (${point.site_code})`],
              ["Unit", point.unit_tag],
              ["Circuit", point.circuit_tag],
              ["Circuit material", material ? material.name : point.material_code],
              [
                "State",
                <StatusBadge
                  key="s"
                  status={point.active ? "active" : "disabled"}
                  label={point.active ? "in use" : "out of use"}
                />,
              ],
              [
                "Coupon in service",
                point.coupon_serial
                  ? `${point.coupon_serial}, installed ${formatLocal(point.installed_at!, tz)} (${tz})`
                  : "none",
              ],
              ["Added", `${formatLocal(point.created_at, tz)} (${tz})`],
            ]}
          />
        </Card>
      </div>

      <section aria-labelledby="history-heading" className="space-y-3">
        <h2 id="history-heading" className="text-lg font-semibold">
          History of this point
        </h2>
        <DataTable
          data={trail}
          columns={trailColumns}
          caption="Changes to this point, newest first"
          searchLabel="Search the history"
          empty={
            <EmptyState title="No recorded changes">
              Every change saved on this page is recorded here with who made it, when, and the values before and after.
            </EmptyState>
          }
        />
      </section>
    </div>
  );
}

const trailCol = createColumnHelper<TrailRow>();

export const meta: Route.MetaFunction = ({ data }) => [{ title: `Point ${data?.point.tag ?? ""} · Set-up · Wallcast` }];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
