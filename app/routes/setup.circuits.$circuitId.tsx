import { createColumnHelper } from "@tanstack/react-table";
import { Form, Link, useNavigation, useSearchParams } from "react-router";
import { StatusBadge } from "~/components/badges";
import { Button, ButtonLink } from "~/components/button";
import { DesignSummary } from "~/components/circuit-design";
import { DataTable } from "~/components/data-table";
import { CheckboxField, SelectField, TextField } from "~/components/field";
import { formFailure, useFormKey } from "~/components/form-failure";
import { Card, EmptyState, EngineeringCaution, PageHeader } from "~/components/layout";
import { FormCard, Section } from "~/components/setup-section";
import { actorOf } from "~/models/audit.server";
import { getCircuit } from "~/models/circuits.server";
import {
  cmlsOfCircuits,
  createCml,
  replaceComponent,
  replacementsOfCircuit,
  setCmlRetired,
  updateCml,
} from "~/models/cmls.server";
import { CML_COMPONENTS, CML_COMPONENT_WORDS, baselineWords, componentWord } from "~/services/cml-spec";
import { materialName } from "~/services/coupon-spec";
import { db } from "~/services/db.server";
import { redirectWithFlash } from "~/services/flash.server";
import { notFound, requireOwnerUser, requireUser, requireUuid } from "~/services/guards.server";
import { requestIdOf } from "~/services/problem.server";
import { formAction, intentOf, readForm } from "~/services/respond.server";
import type { Route } from "./+types/setup.circuits.$circuitId";

// Each form is validated by its schema in models/cmls.server.ts (cmlSchema, replacementSchema)
// inside the write function the intent names.

const intents = ["createCml", "updateCml", "retireCml", "returnCml", "replaceComponent"] as const;
type Intent = (typeof intents)[number];

/** Owner staff with the set-up permission; a contractor is told nothing exists here. */
function requireSetUp(args: Route.LoaderArgs | Route.ActionArgs) {
  if (requireUser(args).organisation.kind !== "owner") notFound();
  return requireOwnerUser(args, "setUpSites");
}

export async function loader(args: Route.LoaderArgs) {
  const user = requireSetUp(args);
  const circuitId = requireUuid(args.params.circuitId);
  const circuit = await getCircuit(db(), user.ownerId, circuitId);
  if (!circuit) notFound();
  const [cmls, replacements] = await Promise.all([
    cmlsOfCircuits(db(), user.ownerId, [circuitId]),
    replacementsOfCircuit(db(), user.ownerId, circuitId),
  ]);
  return { circuit, cmls, replacements };
}

export async function action(args: Route.ActionArgs) {
  const user = requireSetUp(args);
  const circuitId = requireUuid(args.params.circuitId);
  // Another owner's circuit is a 404 whatever the form says.
  if (!(await getCircuit(db(), user.ownerId, circuitId))) notFound();
  const values = await readForm(args.request);
  const intent = intentOf(values, intents);
  const conn = db();
  const actor = actorOf(user);
  const requestId = requestIdOf(args.context);
  const here = `/setup/circuits/${circuitId}`;
  const cmlId = values.id ?? "";

  return formAction(values, async () => {
    switch (intent) {
      case "createCml": {
        const r = await createCml(conn, user.ownerId, actor, circuitId, values, requestId);
        return redirectWithFlash(`${here}#cmls`, { tone: "ok", message: `CML ${r.tag} added.` });
      }
      case "updateCml": {
        const r = await updateCml(conn, user.ownerId, actor, cmlId, values, requestId);
        return redirectWithFlash(`/setup/circuits/${r.circuitId}?cml=${r.id}#cml-form`, {
          tone: "ok",
          message: r.changed ? `CML ${values.tag.trim()} saved.` : "Nothing had changed.",
        });
      }
      case "retireCml":
      case "returnCml": {
        const retire = intent === "retireCml";
        const r = await setCmlRetired(conn, user.ownerId, actor, cmlId, retire, requestId);
        return redirectWithFlash(`/setup/circuits/${r.circuitId}#cmls`, {
          tone: "ok",
          message: !r.changed
            ? "Nothing had changed."
            : retire
              ? `CML ${r.tag} retired: it leaves the survey grid; its readings stay.`
              : `CML ${r.tag} is back in use.`,
        });
      }
      case "replaceComponent": {
        const r = await replaceComponent(conn, user.ownerId, actor, cmlId, values, requestId);
        return redirectWithFlash(`/setup/circuits/${r.circuitId}?cml=${cmlId}#replacements`, {
          tone: "ok",
          message: `Replacement at CML ${r.tag} recorded; rates start again from its date.`,
        });
      }
    }
  });
}

type Loader = Route.ComponentProps["loaderData"];
type CmlRow = Loader["cmls"][number];
const cmlCol = createColumnHelper<CmlRow>();

export default function CircuitSetup({ loaderData, actionData }: Route.ComponentProps) {
  const { circuit, cmls, replacements } = loaderData;
  const [params] = useSearchParams();
  const busy = useNavigation().state === "submitting";
  const editing = cmls.find((m) => m.id === params.get("cml"));
  const freshKey = useFormKey(editing?.id);
  const formOf = (intent: Intent, id?: string) => formFailure(actionData, { intent, id });
  const cmlForm = formOf(editing ? "updateCml" : "createCml", editing?.id);
  const replaceForm = formOf("replaceComponent", editing?.id);
  const retireForm = formOf(editing?.retired ? "returnCml" : "retireCml", editing?.id);
  const ofEditing = replacements.filter((r) => r.cmlId === editing?.id);
  const active = cmls.filter((m) => !m.retired).length;

  const columns = [
    cmlCol.accessor("tag", {
      header: "CML",
      cell: (c) => (
        <Link
          to={`?cml=${c.row.original.id}#cml-form`}
          preventScrollReset
          className="font-medium"
          aria-label={`Open CML ${c.getValue()}`}
        >
          {c.getValue()}
        </Link>
      ),
    }),
    cmlCol.accessor("location", { header: "Location", cell: (c) => c.getValue() || "—" }),
    cmlCol.accessor((r) => componentWord(r.component), { id: "component", header: "Component" }),
    cmlCol.accessor((r) => (r.injectionPoint ? "yes" : "no"), { id: "injection", header: "Injection point" }),
    cmlCol.accessor((r) => r.baseline.thicknessMm ?? -1, {
      id: "baseline",
      header: "Base-line",
      meta: { align: "right" },
      cell: (c) => (
        <span className="text-sm">
          {baselineWords(c.row.original.baseline)}
          {c.row.original.latestReplacement ? (
            <span className="block text-xs text-ink-soft">replaced {c.row.original.latestReplacement.replacedOn}</span>
          ) : null}
        </span>
      ),
    }),
    cmlCol.accessor((r) => r.lastApprovedReading?.measuredOn ?? "", {
      id: "reading",
      header: "Last approved reading",
      cell: (c) => {
        const r = c.row.original.lastApprovedReading;
        return r ? `${r.thicknessMm.toFixed(2)} mm on ${r.measuredOn}` : "None yet";
      },
    }),
    cmlCol.accessor((r) => (r.retired ? "retired" : "in use"), {
      id: "state",
      header: "State",
      cell: (c) => <StatusBadge status={c.row.original.retired ? "disabled" : "active"} label={c.getValue()} />,
    }),
    cmlCol.display({
      id: "open",
      header: () => <span className="sr-only">Edit</span>,
      cell: (c) => (
        <ButtonLink
          to={`?cml=${c.row.original.id}#cml-form`}
          preventScrollReset
          aria-label={`Edit CML ${c.row.original.tag}`}
        >
          Edit
        </ButtonLink>
      ),
    }),
  ];

  return (
    <div className="space-y-8">
      <PageHeader
        title={
          <>
            Circuit {circuit.tag} <span className="text-ink-faint">· {circuit.site_code}</span>
          </>
        }
        question="Where is this circuit's wall measured, and from which base-line do its rates start?"
        actions={
          <>
            <ButtonLink to={`/setup/sites/${circuit.site_id}#circuits`}>{circuit.site_name}</ButtonLink>
            <ButtonLink to={`/setup/sites/${circuit.site_id}?circuit=${circuit.id}#circuit-form`}>
              Edit design data
            </ButtonLink>
          </>
        }
      >
        <p className="mt-1 text-xs text-ink-faint">
          Unit {circuit.unit_tag} · {materialName(circuit.material_code)}
          {circuit.service ? ` · ${circuit.service}` : ""} · {active} CMLs in use
          {cmls.length > active ? `, ${cmls.length - active} retired` : ""}
        </p>
      </PageHeader>

      <Card title="Design data and required thickness">
        <div className="space-y-3">
          <DesignSummary circuit={circuit} />
          <EngineeringCaution compact />
        </div>
      </Card>

      <Section
        id="cmls"
        title="Condition monitoring locations"
        intro="Each CML is a place on the circuit where the wall is measured. CML tags are unique across all your sites. Without a base-line thickness, rates start from the nominal wall less the mill under-tolerance."
      >
        <DataTable
          data={cmls}
          columns={columns}
          caption={`CMLs of circuit ${circuit.tag}`}
          searchLabel="Search CMLs"
          initialSorting={[{ id: "tag", desc: false }]}
          empty={
            <EmptyState title="No CMLs yet">
              Add the first CML with the form below: a tag, where it is on the circuit and the component it sits on. The
              base-line can wait: the nominal wall less mill tolerance stands in for it.
            </EmptyState>
          }
        />
        <FormCard
          id="cml-form"
          title={editing ? `Edit CML ${editing.tag}` : "Add a CML"}
          errors={cmlForm.errors}
          cancelTo={editing ? "?#cmls" : undefined}
        >
          <Form method="post" noValidate className="space-y-4" key={`cml-${freshKey}`}>
            <input type="hidden" name="intent" value={editing ? "updateCml" : "createCml"} />
            {editing ? <input type="hidden" name="id" value={editing.id} /> : null}
            <div className="grid gap-4 sm:grid-cols-2 lg:grid-cols-3">
              <TextField
                label="CML tag"
                name="tag"
                defaultValue={cmlForm.value("tag", editing?.tag)}
                error={cmlForm.errors.tag}
                hint="e.g. OVHD-01-E03"
                autoComplete="off"
              />
              <TextField
                label="Location"
                name="location"
                defaultValue={cmlForm.value("location", editing?.location)}
                error={cmlForm.errors.location}
                hint="Where on the circuit, e.g. first elbow downstream of the exchanger"
                className="lg:col-span-2"
              />
              <SelectField
                label="Component"
                name="component"
                defaultValue={cmlForm.value("component", editing?.component ?? "pipe")}
                error={cmlForm.errors.component}
              >
                {CML_COMPONENTS.map((c) => (
                  <option key={c} value={c}>
                    {CML_COMPONENT_WORDS[c]}
                  </option>
                ))}
              </SelectField>
              <TextField
                label="Base-line thickness"
                name="baseline_thickness_mm"
                unit="mm"
                inputMode="decimal"
                defaultValue={cmlForm.value("baseline_thickness_mm", editing?.recordedBaselineMm)}
                error={cmlForm.errors.baseline_thickness_mm}
                hint="Empty: nominal wall less mill tolerance"
              />
              <TextField
                label="Base-line date"
                name="baseline_on"
                type="date"
                defaultValue={cmlForm.value("baseline_on", editing?.recordedBaselineOn)}
                error={cmlForm.errors.baseline_on}
                hint="e.g. the commissioning survey"
              />
              <div className="flex items-end pb-2">
                <input type="hidden" name="injection_point" value="off" />
                <CheckboxField
                  label="Injection point (3-year interval cap)"
                  name="injection_point"
                  defaultChecked={cmlForm.sent ? cmlForm.value("injection_point") === "on" : editing?.injectionPoint}
                  error={cmlForm.errors.injection_point}
                />
              </div>
            </div>
            {editing ? (
              <p className="text-sm text-ink-soft">Effective base-line: {baselineWords(editing.baseline)}</p>
            ) : null}
            <div className="flex flex-wrap gap-2">
              <Button type="submit" disabled={busy}>
                {editing ? "Save CML" : "Add CML"}
              </Button>
              {editing ? (
                <ButtonLink to="?#cmls" preventScrollReset>
                  Cancel
                </ButtonLink>
              ) : null}
            </div>
          </Form>
          {editing ? (
            <Form method="post" className="mt-4 border-t border-rule pt-4" key={`retire-${freshKey}`}>
              <input type="hidden" name="intent" value={editing.retired ? "returnCml" : "retireCml"} />
              <input type="hidden" name="id" value={editing.id} />
              {retireForm.errors.form ? <p className="text-sm text-bad">{retireForm.errors.form}</p> : null}
              <p className="mb-2 text-sm text-ink-soft">
                {editing.retired
                  ? "This CML is retired: it is not on the survey grid. Its readings and replacements are kept."
                  : "Retire a CML that is no longer measured; its readings and replacements are kept and it can be returned to use."}
              </p>
              <Button type="submit" variant="secondary" disabled={busy}>
                {editing.retired ? `Return CML ${editing.tag} to use` : `Retire CML ${editing.tag}`}
              </Button>
            </Form>
          ) : null}
        </FormCard>
      </Section>

      {editing ? (
        <Section
          id="replacements"
          title={`Replaced components at CML ${editing.tag}`}
          intro="When the component at a CML is replaced, its rates start again from the replacement: no rate spans it."
        >
          {ofEditing.length === 0 ? (
            <p className="text-sm text-ink-soft">No replacement recorded at this CML.</p>
          ) : (
            <ol className="space-y-2 text-sm">
              {ofEditing.map((r) => (
                <li key={r.replacedOn} className="rounded-md border border-rule p-3">
                  <span className="font-medium">{r.replacedOn}</span> — {r.reason}
                  <span className="block text-xs text-ink-soft">
                    {r.baselineThicknessMm === null
                      ? "New base-line: nominal wall less mill tolerance."
                      : `New base-line ${r.baselineThicknessMm.toFixed(2)} mm.`}
                    {r.recordedBy ? ` Recorded by ${r.recordedBy}.` : ""}
                  </span>
                </li>
              ))}
            </ol>
          )}
          <FormCard title="Record a replaced component" errors={replaceForm.errors}>
            <Form method="post" noValidate className="space-y-4" key={`replace-${freshKey}`}>
              <input type="hidden" name="intent" value="replaceComponent" />
              <input type="hidden" name="id" value={editing.id} />
              <div className="grid gap-4 sm:grid-cols-2 lg:grid-cols-3">
                <TextField
                  label="Replaced on"
                  name="replaced_on"
                  type="date"
                  defaultValue={replaceForm.value("replaced_on")}
                  error={replaceForm.errors.replaced_on}
                  hint="Not after today, nor before an earlier replacement"
                />
                <TextField
                  label="New base-line thickness"
                  name="baseline_thickness_mm"
                  unit="mm"
                  inputMode="decimal"
                  defaultValue={replaceForm.value("baseline_thickness_mm")}
                  error={replaceForm.errors.baseline_thickness_mm}
                  hint="Empty: nominal wall less mill tolerance"
                />
                <TextField
                  label="Reason"
                  name="reason"
                  defaultValue={replaceForm.value("reason")}
                  error={replaceForm.errors.reason}
                  hint="e.g. elbow renewed after thinning found in the turnaround"
                />
              </div>
              <Button type="submit" disabled={busy}>
                Record replacement
              </Button>
            </Form>
          </FormCard>
        </Section>
      ) : null}
    </div>
  );
}

export const meta: Route.MetaFunction = ({ data }) => [
  { title: `Circuit ${data?.circuit.tag ?? ""} · Set-up · Wallcast` },
];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
