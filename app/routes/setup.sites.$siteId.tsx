import { createColumnHelper } from "@tanstack/react-table";
import { Form, Link, useNavigation, useSearchParams } from "react-router";
import { StatusBadge } from "~/components/badges";
import { Button, ButtonLink } from "~/components/button";
import { DataTable } from "~/components/data-table";
import { CheckboxField, SelectField, TextField } from "~/components/field";
import { EmptyState, EngineeringCaution, PageHeader } from "~/components/layout";
import { formFailure, useFormKey } from "~/components/form-failure";
import { FormCard, Section } from "~/components/setup-section";
import { requestIdOf } from "~/services/problem.server";
import { MATERIALS } from "~/domain/index.ts";
import { RequiredThickness } from "~/components/circuit-design";
import { materialName } from "~/services/coupon-spec";
import { actorOf } from "~/models/audit.server";
import { createCircuit, listCircuits, updateCircuit } from "~/models/circuits.server";
import { createPoint, listPoints } from "~/models/monitoring-points.server";
import { createUnit, listUnits, updateUnit } from "~/models/process-units.server";
import { getSetupSite, timeZoneNames, updateSite } from "~/models/sites.server";
import { db } from "~/services/db.server";
import { DUE_RULE } from "~/services/coupon-rules";
import { redirectWithFlash } from "~/services/flash.server";
import { notFound, requireOwnerUser, requireUuid } from "~/services/guards.server";
import { formAction, intentOf, readForm } from "~/services/respond.server";
import type { Route } from "./+types/setup.sites.$siteId";

// Each form is validated by its schema in its model (siteSchema, unitSchema, circuitSchema,
// pointSchema) inside the write function the intent names.

const intents = ["updateSite", "createUnit", "updateUnit", "createCircuit", "updateCircuit", "createPoint"] as const;
type Intent = (typeof intents)[number];

/** Positions a coupon holder is commonly set at; the field takes any text. */
const ORIENTATIONS = [
  "bottom of line, 6 o'clock",
  "top of line, 12 o'clock",
  "side of line, 3 o'clock",
  "side of line, 9 o'clock",
  "vessel boot, bottom",
  "downstream of injection point",
];

export async function loader(args: Route.LoaderArgs) {
  const user = requireOwnerUser(args, "setUpSites");
  const siteId = requireUuid(args.params.siteId);
  const site = await getSetupSite(db(), user.ownerId, siteId);
  if (!site) notFound();
  const [units, circuits, points] = await Promise.all([
    listUnits(db(), user.ownerId, siteId),
    listCircuits(db(), user.ownerId, siteId),
    listPoints(db(), user.ownerId, siteId),
  ]);
  return {
    site,
    units,
    circuits,
    points: points.map((p) => ({ ...p, installed_at: p.installed_at ? new Date(p.installed_at).toISOString() : null })),
    timeZones: timeZoneNames(),
  };
}

export async function action(args: Route.ActionArgs) {
  const user = requireOwnerUser(args, "setUpSites");
  const siteId = requireUuid(args.params.siteId);
  // Another owner's site is a 404 whatever the form says.
  if (!(await getSetupSite(db(), user.ownerId, siteId))) notFound();
  const values = await readForm(args.request);
  const intent = intentOf(values, intents);
  const conn = db();
  const actor = actorOf(user);
  const requestId = requestIdOf(args.context);
  const here = `/setup/sites/${siteId}`;

  return formAction(values, async () => {
    switch (intent) {
      case "updateSite": {
        const r = await updateSite(conn, user.ownerId, actor, siteId, values, requestId);
        return redirectWithFlash(here, {
          tone: "ok",
          message: r.changed ? "Site details saved." : "Nothing had changed; the site is as it was.",
        });
      }
      case "createUnit": {
        await createUnit(conn, user.ownerId, actor, siteId, values, requestId);
        return redirectWithFlash(`${here}#units`, {
          tone: "ok",
          message: `Unit ${values.tag.trim()} added. Next: add its circuits.`,
        });
      }
      case "updateUnit": {
        const r = await updateUnit(conn, user.ownerId, actor, values.id ?? "", values, requestId);
        return redirectWithFlash(`/setup/sites/${r.siteId}#units`, {
          tone: "ok",
          message: r.changed ? `Unit ${values.tag.trim()} saved.` : "Nothing had changed.",
        });
      }
      case "createCircuit": {
        await createCircuit(conn, user.ownerId, actor, siteId, values, requestId);
        return redirectWithFlash(`${here}#circuits`, {
          tone: "ok",
          message: `Circuit ${values.tag.trim()} added. Next: add its coupon points.`,
        });
      }
      case "updateCircuit": {
        const r = await updateCircuit(conn, user.ownerId, actor, values.id ?? "", values, requestId);
        return redirectWithFlash(`/setup/sites/${r.siteId}#circuits`, {
          tone: "ok",
          message: r.changed ? `Circuit ${values.tag.trim()} saved.` : "Nothing had changed.",
        });
      }
      case "createPoint": {
        const r = await createPoint(conn, user.ownerId, actor, siteId, values, requestId);
        return redirectWithFlash(`${here}#points`, {
          tone: "ok",
          message: `Point ${r.tag} added. It appears on the contractors’ pull schedule while it is in use.`,
        });
      }
    }
  });
}

type Loader = Route.ComponentProps["loaderData"];
type UnitRow = Loader["units"][number];
type CircuitRow = Loader["circuits"][number];
type PointRow = Loader["points"][number];

export default function SiteSetup({ loaderData, actionData }: Route.ComponentProps) {
  const { site, units, circuits, points, timeZones } = loaderData;
  const [params] = useSearchParams();
  const busy = useNavigation().state === "submitting";
  const editUnit = units.find((u) => u.id === params.get("unit"));
  const editCircuit = circuits.find((c) => c.id === params.get("circuit"));

  /** Errors and typed values for the form that was just sent (and only that one). */
  const formState = (intent: Intent, id?: string) => {
    const view = formFailure(actionData, { intent, id });
    return { ...view, values: view.sent ? actionData?.values : undefined };
  };
  const freshKey = useFormKey();

  const unitColumns = [
    unitCol.accessor("tag", { header: "Unit", cell: (c) => <span className="font-medium">{c.getValue()}</span> }),
    unitCol.accessor("description", { header: "Description", cell: (c) => c.getValue() || "—" }),
    unitCol.accessor("circuits", { header: "Circuits", meta: { align: "right" } }),
    unitCol.accessor("points", { header: "Points", meta: { align: "right" } }),
    unitCol.display({
      id: "edit",
      header: () => <span className="sr-only">Edit</span>,
      cell: (c) => (
        <Link
          to={`?unit=${c.row.original.id}#unit-form`}
          preventScrollReset
          aria-label={`Edit unit ${c.row.original.tag}`}
        >
          Edit
        </Link>
      ),
    }),
  ];
  const circuitColumns = [
    circuitCol.accessor("tag", {
      header: "Circuit",
      cell: (c) => (
        <Link to={`/setup/circuits/${c.row.original.id}`} className="font-medium">
          {c.getValue()}
        </Link>
      ),
    }),
    circuitCol.accessor("unit_tag", { header: "Unit" }),
    circuitCol.accessor((r) => materialName(r.material_code), { id: "material", header: "Material" }),
    circuitCol.accessor("service", { header: "Service", cell: (c) => c.getValue() || "—" }),
    circuitCol.accessor("description", { header: "Description", cell: (c) => c.getValue() || "—" }),
    circuitCol.accessor("points", { header: "Points", meta: { align: "right" } }),
    circuitCol.display({
      id: "pipe",
      header: "Pipe",
      cell: (c) => <PipeSize circuit={c.row.original} />,
    }),
    circuitCol.display({
      id: "required",
      header: "Required thickness",
      cell: (c) => <RequiredThickness view={c.row.original.requiredThickness} />,
    }),
    circuitCol.display({
      id: "edit",
      header: () => <span className="sr-only">Edit</span>,
      cell: (c) => (
        <Link
          to={`?circuit=${c.row.original.id}#circuit-form`}
          preventScrollReset
          aria-label={`Edit circuit ${c.row.original.tag}`}
        >
          Edit
        </Link>
      ),
    }),
  ];

  const siteForm = formState("updateSite");
  const unitForm = formState(editUnit ? "updateUnit" : "createUnit", editUnit?.id);
  const circuitForm = formState(editCircuit ? "updateCircuit" : "createCircuit", editCircuit?.id);
  const pointForm = formState("createPoint");

  return (
    <div className="space-y-8">
      <PageHeader
        title={
          <>
            {site.name} <span className="text-ink-faint">· {site.code}</span>
          </>
        }
        question="Which process units, circuits and coupon points make up this plant, and is each point set up for the contractors?"
        actions={
          <>
            <ButtonLink to="/setup">All sites</ButtonLink>
            <ButtonLink to="/setup/coupons">Coupon stock</ButtonLink>
            <ButtonLink to={`/setup/sites/${site.id}/import`}>Import from CSV</ButtonLink>
          </>
        }
      >
        <p className="mt-1 text-xs text-ink-faint">
          Dates at this site are shown in {site.time_zone}. {units.length} units · {circuits.length} circuits ·{" "}
          {points.length} points
        </p>
        <nav aria-label="On this page" className="no-print mt-2 flex flex-wrap gap-3 text-sm">
          <a href="#points">Coupon points</a>
          <a href="#circuits">Circuits</a>
          <a href="#units">Process units</a>
          <a href="#site">Site details</a>
        </nav>
      </PageHeader>

      {/* ── Points ── */}
      <Section
        id="points"
        title="Coupon points"
        intro="Each point is a coupon position in an access fitting on a circuit. Point tags are unique across all your sites."
      >
        <DataTable
          data={points}
          columns={pointColumns}
          caption="Coupon points at this site"
          searchLabel="Search points"
          initialSorting={[{ id: "tag", desc: false }]}
          empty={
            <EmptyState title="No coupon points yet">
              {circuits.length === 0
                ? "Points sit on circuits: add a process unit and a circuit below first, then add the points with the form under this table."
                : "Add the first point with the form below: the circuit, a tag, the access fitting and where the coupon sits in the line."}
            </EmptyState>
          }
        />
        {circuits.length > 0 ? (
          <FormCard title="Add a coupon point" errors={pointForm.errors}>
            <Form method="post" noValidate className="space-y-4" key={`point-${freshKey}`}>
              <input type="hidden" name="intent" value="createPoint" />
              <div className="grid gap-4 sm:grid-cols-2 lg:grid-cols-4">
                <SelectField
                  label="Circuit"
                  name="circuit_id"
                  defaultValue={pointForm.values?.circuit_id ?? ""}
                  error={pointForm.errors.circuit_id}
                >
                  <option value="">Choose…</option>
                  <CircuitOptions circuits={circuits} />
                </SelectField>
                <TextField
                  label="Point tag"
                  name="tag"
                  defaultValue={pointForm.values?.tag}
                  error={pointForm.errors.tag}
                  hint="e.g. CH-1204 (coupon holder)"
                  autoComplete="off"
                />
                <TextField
                  label="Access fitting"
                  name="access_fitting"
                  defaultValue={pointForm.values?.access_fitting}
                  error={pointForm.errors.access_fitting}
                  hint="Type or number, e.g. 2-in HP fitting AF-12"
                />
                <TextField
                  label="Orientation"
                  name="orientation"
                  list="orientations"
                  defaultValue={pointForm.values?.orientation}
                  error={pointForm.errors.orientation}
                  hint="Where the coupon sits, e.g. bottom of line, 6 o'clock"
                />
                <SelectField
                  label="Mounting"
                  name="mounting"
                  defaultValue={pointForm.values?.mounting ?? "flush"}
                  error={pointForm.errors.mounting}
                >
                  <option value="flush">Flush with the pipe wall</option>
                  <option value="intrusive">Intrusive (into the flow)</option>
                </SelectField>
                <TextField
                  label="Planned exposure"
                  name="planned_exposure_days"
                  inputMode="numeric"
                  unit="days"
                  defaultValue={pointForm.values?.planned_exposure_days ?? "90"}
                  error={pointForm.errors.planned_exposure_days}
                  hint={`7 to 730 days. ${DUE_RULE}`}
                />
                <div className="flex items-end pb-2">
                  <input type="hidden" name="active" value="off" />
                  <CheckboxField
                    label="In use (on the pull schedule)"
                    name="active"
                    defaultChecked={pointForm.values ? pointForm.values.active === "on" : true}
                    error={pointForm.errors.active}
                  />
                </div>
              </div>
              <datalist id="orientations">
                {ORIENTATIONS.map((o) => (
                  <option key={o} value={o} />
                ))}
              </datalist>
              <Button type="submit" disabled={busy}>
                Add point
              </Button>
            </Form>
          </FormCard>
        ) : null}
      </Section>

      {/* ── Circuits ── */}
      <Section
        id="circuits"
        title="Circuits"
        intro="A circuit is a run of piping in one material and similar service. Circuit tags are unique within the site."
      >
        {circuits.length > 0 ? <EngineeringCaution compact /> : null}
        <DataTable
          data={circuits}
          columns={circuitColumns}
          caption="Circuits at this site"
          searchLabel="Search circuits"
          empty={
            <EmptyState title="No circuits yet">
              {units.length === 0
                ? "Circuits belong to process units: add a unit below first, then its circuits."
                : "Add the first circuit with the form below: its unit, tag, material and service."}
            </EmptyState>
          }
        />
        {units.length > 0 ? (
          <FormCard
            id="circuit-form"
            title={editCircuit ? `Edit circuit ${editCircuit.tag}` : "Add a circuit"}
            errors={circuitForm.errors}
            cancelTo={editCircuit ? "?#circuits" : undefined}
          >
            <Form
              method="post"
              noValidate
              className="space-y-4"
              key={`circuit-${editCircuit?.id ?? "new"}-${freshKey}`}
            >
              <input type="hidden" name="intent" value={editCircuit ? "updateCircuit" : "createCircuit"} />
              {editCircuit ? <input type="hidden" name="id" value={editCircuit.id} /> : null}
              <div className="grid gap-4 sm:grid-cols-2 lg:grid-cols-3">
                <SelectField
                  label="Process unit"
                  name="unit_id"
                  defaultValue={
                    circuitForm.values?.unit_id ?? editCircuit?.unit_id ?? (units.length === 1 ? units[0].id : "")
                  }
                  error={circuitForm.errors.unit_id}
                >
                  <option value="">Choose…</option>
                  {units.map((u) => (
                    <option key={u.id} value={u.id}>
                      {u.tag}
                      {u.description ? ` — ${u.description}` : ""}
                    </option>
                  ))}
                </SelectField>
                <TextField
                  label="Circuit tag"
                  name="tag"
                  defaultValue={circuitForm.values?.tag ?? editCircuit?.tag}
                  error={circuitForm.errors.tag}
                  hint="e.g. CDU-OVHD-01"
                  autoComplete="off"
                />
                <SelectField
                  label="Material"
                  name="material"
                  defaultValue={circuitForm.values?.material ?? editCircuit?.material_code ?? "carbon-steel"}
                  error={circuitForm.errors.material}
                  hint="Default for coupons on this circuit; each coupon keeps its own material."
                >
                  {MATERIALS.map((m) => (
                    <option key={m.key} value={m.key}>
                      {m.name}
                      {m.uns ? ` (UNS ${m.uns})` : ""}
                    </option>
                  ))}
                </SelectField>
                <TextField
                  label="Service"
                  name="service"
                  defaultValue={circuitForm.values?.service ?? editCircuit?.service}
                  error={circuitForm.errors.service}
                  hint="Process fluid, e.g. sour water, crude overhead"
                />
                <TextField
                  label="Description"
                  name="description"
                  defaultValue={circuitForm.values?.description ?? editCircuit?.description}
                  error={circuitForm.errors.description}
                  hint="Optional: from where to where"
                  className="lg:col-span-2"
                />
              </div>
              <DesignFields
                tableSource={editCircuit?.tableSource}
                value={(name) => {
                  const typed = circuitForm.values?.[name];
                  if (typed !== undefined) return typed;
                  // A value read from the pipe table stays blank, so it follows the NPS and schedule.
                  if (name === "outside_diameter_mm" && editCircuit?.outside_diameter_from_table) return undefined;
                  if (name === "nominal_wall_mm" && editCircuit?.nominal_wall_from_table) return undefined;
                  const stored = editCircuit?.[name];
                  return stored === null || stored === undefined ? undefined : String(stored);
                }}
                errors={circuitForm.errors}
              />
              <div className="flex gap-2">
                <Button type="submit" disabled={busy}>
                  {editCircuit ? "Save circuit" : "Add circuit"}
                </Button>
                {editCircuit ? (
                  <ButtonLink to="?#circuits" preventScrollReset>
                    Cancel
                  </ButtonLink>
                ) : null}
              </div>
            </Form>
          </FormCard>
        ) : null}
      </Section>

      {/* ── Units ── */}
      <Section
        id="units"
        title="Process units"
        intro="The plant’s process units, e.g. crude distillation or amine treating. Unit tags are unique within the site."
      >
        <DataTable
          data={units}
          columns={unitColumns}
          caption="Process units at this site"
          searchLabel="Search units"
          empty={
            <EmptyState title="No process units yet">
              Start here: add the plant’s first process unit with the form below; circuits and coupon points hang off
              it.
            </EmptyState>
          }
        />
        <FormCard
          id="unit-form"
          title={editUnit ? `Edit unit ${editUnit.tag}` : "Add a process unit"}
          errors={unitForm.errors}
          cancelTo={editUnit ? "?#units" : undefined}
        >
          <Form method="post" noValidate className="space-y-4" key={`unit-${editUnit?.id ?? "new"}-${freshKey}`}>
            <input type="hidden" name="intent" value={editUnit ? "updateUnit" : "createUnit"} />
            {editUnit ? <input type="hidden" name="id" value={editUnit.id} /> : null}
            <div className="grid gap-4 sm:grid-cols-3">
              <TextField
                label="Unit tag"
                name="tag"
                defaultValue={unitForm.values?.tag ?? editUnit?.tag}
                error={unitForm.errors.tag}
                hint="e.g. CDU-1"
                autoComplete="off"
              />
              <TextField
                label="Description"
                name="description"
                defaultValue={unitForm.values?.description ?? editUnit?.description}
                error={unitForm.errors.description}
                hint="e.g. Crude distillation unit"
                className="sm:col-span-2"
              />
            </div>
            <div className="flex gap-2">
              <Button type="submit" disabled={busy}>
                {editUnit ? "Save unit" : "Add unit"}
              </Button>
              {editUnit ? (
                <ButtonLink to="?#units" preventScrollReset>
                  Cancel
                </ButtonLink>
              ) : null}
            </div>
          </Form>
        </FormCard>
      </Section>

      {/* ── Site details ── */}
      <Section
        id="site"
        title="Site details"
        intro="Changing the time zone changes only how dates are shown; recorded instants stay as they are."
      >
        <FormCard title="Edit site" errors={siteForm.errors}>
          <Form method="post" noValidate className="space-y-4" key={`site-${freshKey}`}>
            <input type="hidden" name="intent" value="updateSite" />
            <div className="grid gap-4 sm:grid-cols-3">
              <TextField
                label="Site name"
                name="name"
                defaultValue={siteForm.values?.name ?? site.name}
                error={siteForm.errors.name}
                autoComplete="off"
              />
              <TextField
                label="Site code"
                name="code"
                defaultValue={siteForm.values?.code ?? site.code}
                error={siteForm.errors.code}
                hint="Up to 16 capitals, digits, - or _"
                autoComplete="off"
                className="uppercase"
              />
              <TextField
                label="Time zone"
                name="time_zone"
                list="time-zones"
                defaultValue={siteForm.values?.time_zone ?? site.time_zone}
                error={siteForm.errors.time_zone}
                hint="IANA name, e.g. America/Chicago or UTC"
                autoComplete="off"
              />
            </div>
            <datalist id="time-zones">
              {timeZones.map((z) => (
                <option key={z} value={z} />
              ))}
            </datalist>
            <Button type="submit" disabled={busy}>
              Save site
            </Button>
          </Form>
        </FormCard>
      </Section>
    </div>
  );
}

const unitCol = createColumnHelper<UnitRow>();
const circuitCol = createColumnHelper<CircuitRow>();
const pointCol = createColumnHelper<PointRow>();

const pointColumns = [
  pointCol.accessor("tag", {
    header: "Point",
    cell: (c) => (
      <Link to={`/setup/points/${c.row.original.id}`} className="font-medium">
        {c.getValue()}
      </Link>
    ),
  }),
  pointCol.accessor("circuit_tag", { header: "Circuit" }),
  pointCol.accessor("unit_tag", { header: "Unit" }),
  pointCol.accessor("access_fitting", { header: "Access fitting", cell: (c) => c.getValue() || "—" }),
  pointCol.accessor("orientation", { header: "Orientation", cell: (c) => c.getValue() || "—" }),
  pointCol.accessor("mounting", { header: "Mounting" }),
  pointCol.accessor("planned_exposure_days", {
    header: "Planned exposure",
    meta: { align: "right" },
    cell: (c) => `${c.getValue()} d`,
  }),
  pointCol.accessor((r) => (r.active ? "in use" : "out of use"), {
    id: "active",
    header: "State",
    cell: (c) => <StatusBadge status={c.row.original.active ? "active" : "disabled"} label={c.getValue()} />,
  }),
  pointCol.accessor((r) => r.coupon_serial ?? "", {
    id: "coupon",
    header: "Coupon in service",
    cell: (c) => c.getValue() || "—",
  }),
];

type DesignName = (typeof DESIGN_FIELDS)[number]["name"];

/** The circuit's design data, SI, each field named as its column. */
const DESIGN_FIELDS = [
  { name: "nps", label: "NPS", unit: "", hint: "e.g. 6 or 2-1/2; sets the API 574 structural minimum" },
  { name: "schedule", label: "Schedule", unit: "", hint: "e.g. 40, XS, 80S" },
  {
    name: "outside_diameter_mm",
    label: "Outside diameter D",
    unit: "mm",
    hint: "Empty: from the NPS (ASME B36.10M, NPS ⅛ to 24)",
  },
  { name: "nominal_wall_mm", label: "Nominal wall", unit: "mm", hint: "Empty: from the NPS and schedule" },
  { name: "mill_tolerance_pct", label: "Mill under-tolerance", unit: "%", hint: "12.5 when left empty" },
  { name: "design_pressure_mpa", label: "Design pressure P", unit: "MPa (g)", hint: "Internal, gauge" },
  { name: "design_temperature_c", label: "Design temperature", unit: "°C", hint: "Y is read from it when Y is empty" },
  { name: "allowable_stress_mpa", label: "Allowable stress S", unit: "MPa", hint: "At the design temperature" },
  { name: "joint_factor_e", label: "Joint quality factor E", unit: "", hint: "1 for seamless pipe" },
  { name: "weld_factor_w", label: "Weld strength reduction factor W", unit: "", hint: "1 when left empty" },
  { name: "y_coefficient", label: "Coefficient Y", unit: "", hint: "Empty: B31.3 Table 304.1.1 by material" },
  { name: "corrosion_allowance_mm", label: "Corrosion allowance", unit: "mm", hint: "Shown beside, not added" },
  { name: "structural_minimum_mm", label: "Structural minimum (owner’s)", unit: "mm", hint: "Empty: API 574 by NPS" },
  { name: "structural_minimum_reason", label: "Reason for the owner’s minimum", unit: "", hint: "Required with it" },
] as const;

function DesignFields({
  value,
  errors,
  tableSource,
}: {
  value: (name: DesignName | "piping_class") => string | undefined;
  errors: Record<string, string | undefined>;
  tableSource?: CircuitRow["tableSource"];
}) {
  const tableHint = (name: DesignName) =>
    name === "outside_diameter_mm" && tableSource?.outsideDiameter
      ? `Now ${tableSource.outsideDiameter}; leave empty to keep following the table`
      : name === "nominal_wall_mm" && tableSource?.nominalWall
        ? `Now ${tableSource.nominalWall}; leave empty to keep following the table`
        : undefined;
  return (
    <fieldset className="space-y-3 rounded-md border border-rule p-3">
      <legend className="px-1 text-sm font-semibold">Design data</legend>
      <p className="text-sm text-ink-soft">
        Optional until the circuit’s design is known. With a design pressure, the outside diameter, S, E and the design
        temperature (or Y) are needed for the ASME B31.3 eq. 3a thickness. SI units.
      </p>
      <div className="grid gap-4 sm:grid-cols-2 lg:grid-cols-3">
        {DESIGN_FIELDS.map((f) => (
          <TextField
            key={f.name}
            label={f.label}
            name={f.name}
            unit={f.unit || undefined}
            inputMode={f.unit ? "decimal" : undefined}
            defaultValue={value(f.name)}
            error={errors[f.name]}
            hint={tableHint(f.name) ?? (f.hint || undefined)}
            autoComplete="off"
          />
        ))}
        <SelectField
          label="Piping class"
          name="piping_class"
          defaultValue={value("piping_class") ?? ""}
          error={errors.piping_class}
        >
          <option value="">Not set</option>
          {[1, 2, 3, 4].map((n) => (
            <option key={n} value={String(n)}>
              Class {n}
            </option>
          ))}
        </SelectField>
      </div>
    </fieldset>
  );
}

/** NPS and schedule, the diameter and wall, and where they came from when from the pipe tables. */
function PipeSize({ circuit: c }: { circuit: CircuitRow }) {
  if (!c.nps && c.outside_diameter_mm === null && c.nominal_wall_mm === null) return <span>—</span>;
  return (
    <div className="min-w-40 text-sm">
      <div>{c.nps ? `NPS ${c.nps}${c.schedule ? ` · ${c.schedule}` : ""}` : "NPS not given"}</div>
      {c.outside_diameter_mm !== null ? (
        <div className="text-xs text-ink-soft">
          D {c.outside_diameter_mm} mm{c.tableSource.outsideDiameter ? ` ${c.tableSource.outsideDiameter}` : ""}
        </div>
      ) : null}
      {c.nominal_wall_mm !== null ? (
        <div className="text-xs text-ink-soft">
          Wall {c.nominal_wall_mm} mm{c.tableSource.nominalWall ? ` ${c.tableSource.nominalWall}` : ""}
        </div>
      ) : null}
    </div>
  );
}

function CircuitOptions({ circuits }: { circuits: CircuitRow[] }) {
  const byUnit = new Map<string, CircuitRow[]>();
  for (const c of circuits) byUnit.set(c.unit_tag, [...(byUnit.get(c.unit_tag) ?? []), c]);
  return (
    <>
      {[...byUnit].map(([unit, list]) => (
        <optgroup key={unit} label={`Unit ${unit}`}>
          {list.map((c) => (
            <option key={c.id} value={c.id}>
              {c.tag}
              {c.service ? ` — ${c.service}` : ""}
            </option>
          ))}
        </optgroup>
      ))}
    </>
  );
}

export const meta: Route.MetaFunction = ({ data }) => [{ title: `${data?.site.name ?? "Site"} · Set-up · Wallcast` }];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
