import { Form, Link, useNavigation } from "react-router";
import { StatusBadge } from "~/components/badges";
import { Button, ButtonLink } from "~/components/button";
import { FormAlert, SelectField } from "~/components/field";
import { formFailure, useFormKey } from "~/components/form-failure";
import { Card, EmptyState, PageHeader } from "~/components/layout";
import { Cell, TableHead } from "~/components/table-head";
import { tickedOf, TickBox } from "~/components/tick-list";
import { hasThicknessScope, listSurveys, startSurvey, surveySites } from "~/models/thickness-surveys.server";
import { db } from "~/services/db.server";
import { redirectWithFlash } from "~/services/flash.server";
import { requireCapability } from "~/services/guards.server";
import { requestIdOf } from "~/services/problem.server";
import { formAction, intentOf, pageLoad, readForm } from "~/services/respond.server";
import { Forbidden } from "~/services/outcome";
import { formatLocal } from "~/services/time";
import type { Route } from "./+types/surveys";

/** Thickness surveys: an inspection contractor's own, and starting one at a covered site. */

async function technician(args: Route.LoaderArgs | Route.ActionArgs) {
  const user = requireCapability(args, "recordWork");
  await pageLoad(async () => {
    if (!(await hasThicknessScope(db(), user)))
      throw new Forbidden(
        "Your company's contracts in force do not cover thickness inspection, so there are no surveys to record.",
      );
  });
  return user;
}

export async function loader(args: Route.LoaderArgs) {
  const user = await technician(args);
  const [surveys, sites] = await Promise.all([
    pageLoad(() => listSurveys(db(), user)),
    pageLoad(() => surveySites(db(), user)),
  ]);
  return { surveys, sites };
}

export async function action(args: Route.ActionArgs) {
  const user = await technician(args);
  const values = await readForm(args.request);
  intentOf(values, ["startSurvey"] as const);
  return formAction(values, async () => {
    const r = await startSurvey(
      db(),
      user,
      { siteId: values.siteId, circuitIds: tickedOf(values, "circuit") },
      requestIdOf(args.context),
    );
    const message = r.created
      ? `Survey ${r.reference} started. Enter a reading per CML, then submit it.`
      : r.added > 0
        ? `Your draft survey ${r.reference} at this site was open already: ${r.added} circuit${r.added === 1 ? "" : "s"} added to it.`
        : `Your draft survey ${r.reference} already covers these circuits.`;
    return redirectWithFlash(`/surveys/${r.submissionId}`, { tone: "ok", message });
  });
}

const stateWords: Record<string, string> = {
  draft: "draft",
  submitted: "with the owner",
  returned: "returned",
  approved: "approved",
};

export default function Surveys({ loaderData, actionData }: Route.ComponentProps) {
  const { surveys, sites } = loaderData;
  const form = formFailure(actionData, { intent: "startSurvey" });
  const busy = useNavigation().state === "submitting";
  const chosen = form.value("siteId", sites.length === 1 ? sites[0].id : "");
  return (
    <div className="space-y-6">
      <PageHeader
        title="Thickness surveys"
        question="Which circuits are you surveying, and where does each survey stand? Start a survey, enter a reading per CML, attach the sheets, then submit it to the owner."
        actions={<a href="#start">Start a survey</a>}
      />
      {surveys.length === 0 ? (
        <EmptyState title="No surveys yet">
          Start a survey below: choose the site and the circuits you are measuring today.
        </EmptyState>
      ) : (
        <div className="overflow-x-auto rounded-lg border border-rule bg-panel">
          <table className="stack-table min-w-full text-sm">
            <caption className="sr-only">Your thickness surveys</caption>
            <TableHead
              labels={["Survey", "State", "Site", "Circuits", "Readings", "Flags", "Submitted (site time)", ""]}
            />
            <tbody>
              {surveys.map((s) => (
                <tr key={s.id} className="border-t border-rule align-top">
                  <Cell label="Survey">
                    <Link to={`/surveys/${s.id}`} className="font-medium">
                      {s.reference}
                    </Link>
                    {s.status === "returned" && s.decisionComment ? (
                      <p className="mt-1 text-xs text-ink-soft">
                        <span className="font-medium">Engineer’s comment:</span> {s.decisionComment}
                      </p>
                    ) : null}
                  </Cell>
                  <Cell label="State">
                    <StatusBadge status={s.status} label={stateWords[s.status] ?? s.status} />
                  </Cell>
                  <Cell label="Site">
                    {s.siteName} ({s.ownerName})
                  </Cell>
                  <Cell label="Circuits">{s.circuitTags.join(", ") || "—"}</Cell>
                  <Cell label="Readings" className="num">
                    {s.readings}
                  </Cell>
                  <Cell label="Flags" className="num">
                    {s.status === "draft" ? "—" : s.flagCount}
                  </Cell>
                  <Cell label="Submitted (site time)">
                    {s.submittedAt ? formatLocal(s.submittedAt, s.timeZone) : "not yet"}
                  </Cell>
                  <Cell label="">
                    <ButtonLink to={`/surveys/${s.id}`} variant="secondary">
                      {s.status === "draft" || s.status === "returned" ? "Continue" : "Open"}
                    </ButtonLink>
                  </Cell>
                </tr>
              ))}
            </tbody>
          </table>
        </div>
      )}
      <div id="start">
        <Card title="Start a survey">
          {sites.length === 0 ? (
            <p className="text-sm text-ink-soft">No site is covered by a thickness-inspection contract in force.</p>
          ) : (
            <Form method="post" key={useFormKey()} className="space-y-4">
              <input type="hidden" name="intent" value="startSurvey" />
              {form.errors.form ? <FormAlert>{form.errors.form}</FormAlert> : null}
              <SelectField label="Site" name="siteId" defaultValue={chosen} error={form.errors.siteId}>
                {sites.length > 1 ? <option value="">Choose the site</option> : null}
                {sites.map((s) => (
                  <option key={s.id} value={s.id}>
                    {s.name} ({s.code}) · {s.ownerName}
                  </option>
                ))}
              </SelectField>
              {sites.map((s) => (
                <fieldset key={s.id} className="space-y-1">
                  <legend className="text-sm font-medium">
                    Circuits at {s.name}
                    {sites.length > 1 ? " (tick circuits of the site chosen above)" : ""}
                  </legend>
                  {s.circuits.length === 0 ? (
                    <p className="text-sm text-ink-soft">The owner has set up no circuits at this site yet.</p>
                  ) : (
                    <div className="grid gap-1 sm:grid-cols-2">
                      {s.circuits.map((c) => (
                        <TickBox
                          key={c.id}
                          form={form}
                          list="circuit"
                          value={c.id}
                          stored={false}
                          label={
                            <>
                              <span className="font-medium">{c.tag}</span> · unit {c.unitTag}
                              {c.description ? ` · ${c.description}` : ""} · {c.cmls === 1 ? "1 CML" : `${c.cmls} CMLs`}
                            </>
                          }
                        />
                      ))}
                    </div>
                  )}
                </fieldset>
              ))}
              {form.errors.circuitIds ? (
                <p className="text-xs font-medium text-bad" role="alert">
                  {form.errors.circuitIds}
                </p>
              ) : null}
              <p className="text-xs text-ink-faint">
                One draft survey per site: starting again at a site with a draft adds the circuits to it.
              </p>
              <Button type="submit" disabled={busy}>
                {busy ? "Starting…" : "Start the survey"}
              </Button>
            </Form>
          )}
        </Card>
      </div>
    </div>
  );
}

export const meta: Route.MetaFunction = () => [{ title: "Thickness surveys · Wallcast" }];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
