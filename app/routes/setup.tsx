import { createColumnHelper } from "@tanstack/react-table";
import { Form, Link, useNavigation } from "react-router";
import { StatusBadge } from "~/components/badges";
import { Button, ButtonLink } from "~/components/button";
import { DataTable } from "~/components/data-table";
import { FormAlert, TextField } from "~/components/field";
import { Card, EmptyState, Facts, PageHeader } from "~/components/layout";
import { formFailure, useFormKey } from "~/components/form-failure";
import { actorOf } from "~/models/audit.server";
import { couponStock } from "~/models/coupons.server";
import { ownerSettings } from "~/models/owner-settings.server";
import { createSite, listSetupSites, timeZoneNames } from "~/models/sites.server";
import { db } from "~/services/db.server";
import { redirectWithFlash } from "~/services/flash.server";
import { requireOwnerUser } from "~/services/guards.server";
import { requestIdOf } from "~/services/problem.server";
import { formAction, intentOf, readForm } from "~/services/respond.server";
import type { Route } from "./+types/setup";

// The form is validated by siteSchema in models/sites.server.ts (createSite).

export async function loader(args: Route.LoaderArgs) {
  const user = requireOwnerUser(args, "setUpSites");
  const [sites, stock, settings] = await Promise.all([
    listSetupSites(db(), user.ownerId),
    couponStock(db(), user.ownerId),
    ownerSettings(db(), user.ownerId),
  ]);
  return {
    sites,
    stock,
    ownThresholds: { general: Boolean(settings.generalThresholds), pitting: Boolean(settings.pittingThresholds) },
    minimumExposureDays: settings.minimumExposureDays,
    timeZones: timeZoneNames(),
  };
}

export async function action(args: Route.ActionArgs) {
  const user = requireOwnerUser(args, "setUpSites");
  const values = await readForm(args.request);
  intentOf(values, ["createSite"] as const);
  return formAction(values, async () => {
    const result = await createSite(db(), user.ownerId, actorOf(user), values, requestIdOf(args.context));
    return redirectWithFlash(`/setup/sites/${result.id}`, {
      tone: "ok",
      message: `Site ${values.name.trim()} (${result.code}) added. Next: add its process units, circuits and coupon points.`,
    });
  });
}

type SiteRow = Route.ComponentProps["loaderData"]["sites"][number];
const col = createColumnHelper<SiteRow>();

/** What the site still needs before contractors can record coupon work there. */
function nextStep(s: SiteRow): { status: string; label: string } {
  if (s.units === 0) return { status: "draft", label: "add a process unit" };
  if (s.circuits === 0) return { status: "draft", label: "add a circuit" };
  if (s.active_points === 0) return { status: "draft", label: "add coupon points" };
  return { status: "active", label: "ready for coupon work" };
}

const columns = [
  col.accessor("name", {
    header: "Site",
    cell: (c) => (
      <Link to={`/setup/sites/${c.row.original.id}`} className="font-medium">
        {c.getValue()}
      </Link>
    ),
  }),
  col.accessor("code", { header: "Code" }),
  col.accessor("time_zone", { header: "Time zone" }),
  col.accessor("units", { header: "Units", meta: { align: "right" } }),
  col.accessor("circuits", { header: "Circuits", meta: { align: "right" } }),
  col.accessor("active_points", {
    header: "Points in use",
    meta: { align: "right" },
    cell: (c) => (
      <span title={`${c.row.original.points - c.getValue()} taken out of use`}>
        {c.getValue()} <span className="text-ink-faint">of {c.row.original.points}</span>
      </span>
    ),
  }),
  col.accessor("coupons_in_service", { header: "Coupons in service", meta: { align: "right" } }),
  col.accessor((r) => nextStep(r).label, {
    id: "next",
    header: "Next step",
    cell: (c) => <StatusBadge status={nextStep(c.row.original).status} label={c.getValue()} />,
  }),
];

export default function Setup({ loaderData, actionData }: Route.ComponentProps) {
  const { sites, stock, ownThresholds, minimumExposureDays, timeZones } = loaderData;
  const form = formFailure(actionData);
  const errors = form.errors;
  const values: Record<string, string | undefined> = (form.sent ? actionData?.values : undefined) ?? {};
  const formKey = useFormKey();
  const busy = useNavigation().state === "submitting";
  const errorCount = Object.values(errors).filter(Boolean).length;

  return (
    <div className="space-y-6">
      <PageHeader
        title="Set-up"
        question="What is set up at each of your plants, and what is still missing before contractors can record coupon work?"
        actions={
          <>
            <ButtonLink to="/setup/coupons">Coupon stock</ButtonLink>
            <ButtonLink to="/setup/settings">Thresholds and rate policy</ButtonLink>
          </>
        }
      />

      <div className="grid gap-4 md:grid-cols-2">
        <Card
          title="Coupon stock"
          actions={
            <Link to="/setup/coupons" className="text-sm">
              Open
            </Link>
          }
        >
          <Facts
            items={[
              ["Ready to install (in stock)", `${stock.in_stock} coupons`],
              ["In service at a point", `${stock.in_service} coupons`],
              ["Removed", `${stock.removed} coupons`],
            ]}
          />
          {stock.in_stock === 0 ? (
            <p className="mt-3 text-xs text-ink-soft">
              Contractors can only install coupons that are in your stock. Add them one by one or import a CSV file
              under Coupon stock.
            </p>
          ) : null}
        </Card>
        <Card
          title="Severity and exposure rules"
          actions={
            <Link to="/setup/settings" className="text-sm">
              Change
            </Link>
          }
        >
          <Facts
            items={[
              ["General corrosion bands", ownThresholds.general ? "your own thresholds" : "NACE SP0775 defaults"],
              ["Pitting bands", ownThresholds.pitting ? "your own thresholds" : "NACE SP0775 defaults"],
              ["Shortest exposure without a flag", `${minimumExposureDays} days`],
            ]}
          />
        </Card>
      </div>

      <section aria-labelledby="sites-heading" className="space-y-3">
        <h2 id="sites-heading" className="text-lg font-semibold">
          Your sites
        </h2>
        <DataTable
          data={sites}
          columns={columns}
          caption="Your sites and what is set up at each"
          searchLabel="Search sites"
          empty={
            <EmptyState title="No sites yet">
              Add your first plant with the form below: its name, a short code used in tags and reports, and the time
              zone its dates are shown in. Then add its process units, circuits and coupon points.
            </EmptyState>
          }
        />
      </section>

      <Card title="Add a site" className="max-w-3xl">
        {errorCount > 0 ? (
          <div className="mb-3">
            <FormAlert>
              Nothing was saved: {errorCount === 1 ? "one field needs" : `${errorCount} fields need`} attention.
            </FormAlert>
          </div>
        ) : null}
        <Form method="post" noValidate className="space-y-4" key={formKey}>
          <input type="hidden" name="intent" value="createSite" />
          <div className="grid gap-4 sm:grid-cols-3">
            <TextField
              label="Site name"
              name="name"
              defaultValue={values.name}
              error={errors.name}
              hint="As people call the plant, e.g. Brackwater Refinery."
              autoComplete="off"
            />
            <TextField
              label="Site code"
              name="code"
              defaultValue={values.code}
              error={errors.code}
              hint="Up to 16 capitals, digits, - or _; e.g. BWR."
              autoComplete="off"
              className="uppercase"
            />
            <TextField
              label="Time zone"
              name="time_zone"
              list="time-zones"
              defaultValue={values.time_zone}
              error={errors.time_zone}
              hint="IANA name, e.g. America/Chicago or UTC. Dates at the site are shown in it."
              autoComplete="off"
            />
          </div>
          <datalist id="time-zones">
            {timeZones.map((z) => (
              <option key={z} value={z} />
            ))}
          </datalist>
          <Button type="submit" disabled={busy}>
            Add site
          </Button>
        </Form>
      </Card>
    </div>
  );
}

export const meta: Route.MetaFunction = () => [{ title: "Set-up · Wallcast" }];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
