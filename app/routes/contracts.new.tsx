import { Form, Link, useNavigation } from "react-router";
import { Button, ButtonLink } from "~/components/button";
import { FormAlert, SelectField, TextField } from "~/components/field";
import { formFailure } from "~/components/form-failure";
import { Card, EmptyState, PageHeader } from "~/components/layout";
import { TickBox, tickedOf } from "~/components/tick-list";

import { contractCalendar, contractSiteChoices, createContract } from "~/models/contracts.server";
import { engagedContractors } from "~/models/users.server";
import { db } from "~/services/db.server";
import { redirectWithFlash } from "~/services/flash.server";
import { requireOwnerUser } from "~/services/guards.server";
import { scopeLabels, type ScopeOfWork } from "~/services/permissions";
import { formAction, readForm } from "~/services/respond.server";
import { requestIdOf } from "~/services/problem.server";
import type { Route } from "./+types/contracts.new";

/** The contractor select's value for "a company not listed yet". */
const newCompany = "new";

export async function loader(args: Route.LoaderArgs) {
  const user = requireOwnerUser(args, "manageContracts");
  const [contractors, sites, { today }] = await Promise.all([
    engagedContractors(db(), user.ownerId),
    contractSiteChoices(db(), user.ownerId),
    contractCalendar(db()),
  ]);
  return { contractors, sites, today };
}

export async function action(args: Route.ActionArgs) {
  const user = requireOwnerUser(args, "manageContracts");
  const values = await readForm(args.request);
  const text = (name: string) => values[name] ?? "";
  const newOne = text("contractorId") === newCompany;
  return formAction(values, async () => {
    const created = await createContract(
      db(),
      user,
      {
        contractorId: newOne ? undefined : text("contractorId"),
        newContractorName: newOne ? text("newContractorName") : undefined,
        reference: text("reference"),
        siteIds: tickedOf(values, "siteIds"),
        scope: tickedOf(values, "scope"),
        startsOn: text("startsOn"),
        endsOn: text("endsOn"),
      },
      requestIdOf(args.context),
    );
    return redirectWithFlash(`/contracts/${created.contractId}`, {
      tone: "ok",
      message: `Contract ${text("reference").trim()} saved. Invite the contractor’s technicians under People.`,
    });
  });
}

export default function NewContract({ loaderData, actionData }: Route.ComponentProps) {
  const { contractors, sites, today } = loaderData;
  const form = formFailure(actionData);
  const errors = form.errors;
  const busy = useNavigation().state === "submitting";
  const errorCount = form.count;

  if (sites.length === 0)
    return (
      <div className="max-w-3xl">
        <PageHeader
          title="New contract"
          question="Which contractor may work at which of your sites, on what, and when?"
        />
        <EmptyState title="Add a site first" action={<ButtonLink to="/sites">Go to sites</ButtonLink>}>
          A contract covers some of your organisation’s sites, and there are none yet. An administrator or integrity
          engineer adds the plants under Sites; then come back here.
        </EmptyState>
      </div>
    );

  return (
    <div className="max-w-3xl space-y-6">
      <PageHeader
        title="New contract"
        question="Which contractor may work at which of your sites, on what, and when?"
        actions={<ButtonLink to="/contracts">Back to contracts</ButtonLink>}
      />
      {errorCount > 0 ? (
        <FormAlert>
          Nothing was saved: {errorCount === 1 ? "one field needs" : `${errorCount} fields need`} attention.
        </FormAlert>
      ) : null}
      <Form method="post" className="space-y-6" noValidate>
        <Card title="Contractor">
          <div className="grid gap-4 sm:grid-cols-2">
            {contractors.length > 0 ? (
              <SelectField
                label="Contractor company"
                name="contractorId"
                defaultValue={form.value("contractorId", "")}
                error={errors.contractorId}
              >
                <option value="">Choose…</option>
                {contractors.map((c) => (
                  <option key={c.id} value={c.id}>
                    {c.name}
                  </option>
                ))}
                <option value={newCompany}>A company not listed yet (type its name)</option>
              </SelectField>
            ) : (
              <input type="hidden" name="contractorId" value={newCompany} />
            )}
            <TextField
              label={contractors.length > 0 ? "New company’s name" : "Contractor company’s name"}
              name="newContractorName"
              defaultValue={form.value("newContractorName")}
              error={errors.newContractorName}
              hint={
                contractors.length > 0
                  ? "Only when the company is not in the list; it is added as a new contractor."
                  : "Your first contractor: it is added as a new organisation."
              }
            />
            <TextField
              label="Contract reference"
              name="reference"
              defaultValue={form.value("reference")}
              error={errors.reference}
              hint="Your contract or purchase-order number, e.g. NVE-CM-2026-003."
            />
          </div>
        </Card>

        <Card title="Terms">
          <div className="space-y-5">
            <fieldset aria-describedby={errors.siteIds ? "sites-error" : undefined}>
              <legend className="text-sm font-medium text-ink">Sites covered</legend>
              <div className="mt-2 grid gap-1.5 sm:grid-cols-2">
                {sites.map((s) => (
                  <TickBox
                    key={s.id}
                    form={form}
                    list="siteIds"
                    value={s.id}
                    stored={false}
                    label={
                      <>
                        {s.name} <span className="text-ink-faint">({s.code})</span>
                      </>
                    }
                  />
                ))}
              </div>
              {errors.siteIds ? (
                <p id="sites-error" className="mt-1 text-xs font-medium text-bad" role="alert">
                  {errors.siteIds}
                </p>
              ) : null}
            </fieldset>

            <fieldset aria-describedby={errors.scope ? "scope-error" : undefined}>
              <legend className="text-sm font-medium text-ink">Work the contractor may record</legend>
              <div className="mt-2 grid gap-1.5 sm:grid-cols-2">
                {(Object.keys(scopeLabels) as ScopeOfWork[]).map((k) => (
                  <TickBox key={k} form={form} list="scope" value={k} stored={false} label={scopeLabels[k]} />
                ))}
              </div>
              {errors.scope ? (
                <p id="scope-error" className="mt-1 text-xs font-medium text-bad" role="alert">
                  {errors.scope}
                </p>
              ) : null}
            </fieldset>

            <div className="grid gap-4 sm:grid-cols-2">
              <TextField
                label="First day"
                name="startsOn"
                placeholder="YYYY-MM-DD"
                autoComplete="off"
                defaultValue={form.value("startsOn", today)}
                error={errors.startsOn}
                hint="The contractor can work from this day."
              />
              <TextField
                label="Last day (optional)"
                name="endsOn"
                placeholder="YYYY-MM-DD"
                autoComplete="off"
                defaultValue={form.value("endsOn")}
                error={errors.endsOn}
                hint="Included. Leave empty for an open-ended contract."
              />
            </div>
          </div>
        </Card>

        <div className="flex items-center gap-3">
          <Button type="submit" disabled={busy}>
            {busy ? "Saving…" : "Save contract"}
          </Button>
          <Link to="/contracts" className="text-sm">
            Cancel
          </Link>
        </div>
      </Form>
    </div>
  );
}

export const meta: Route.MetaFunction = () => [{ title: "New contract · Wallcast" }];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
