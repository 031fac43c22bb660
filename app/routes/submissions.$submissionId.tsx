import { data, Form, Link, redirect, useNavigation } from "react-router";
import { SeverityBadge, StatusBadge, type SeverityWord } from "~/components/badges";
import { Button, ButtonLink } from "~/components/button";
import { FormAlert, TextAreaField } from "~/components/field";
import { Cell, TableHead } from "~/components/table-head";
import { Card, EmptyState, EngineeringCaution, Facts, PageHeader } from "~/components/layout";
import { formatPittingFactor, Grade, NotDeterminable } from "~/components/coupon-result";
import { formatGrams, formatQuantity } from "~/components/quantity";
import { getSubmission, submitForReview } from "~/models/submissions.server";
import { db } from "~/services/db.server";
import { redirectWithFlash } from "~/services/flash.server";
import { requireUser, requireUuid } from "~/services/guards.server";
import { can } from "~/services/permissions";
import { requestIdOf } from "~/services/problem.server";
import { formAction, intentOf, pageLoad, readForm } from "~/services/respond.server";
import { formatLocal } from "~/services/time";
import type { Route } from "./+types/submissions.$submissionId";

async function load(args: Route.LoaderArgs | Route.ActionArgs) {
  const user = requireUser(args);
  const id = requireUuid(args.params.submissionId);
  return { user, ...(await pageLoad(() => getSubmission(db(), user, id))) };
}

export async function loader(args: Route.LoaderArgs) {
  const { user, submission, ...detail } = await load(args);
  const results = detail.kind === "coupon" ? detail.results : [];
  // Owner staff read submissions on the review page.
  if (user.organisation.kind === "owner") throw redirect(`/review/${submission.id}`);
  // A thickness survey has its own page (the grid).
  if (submission.kind === "thickness") throw redirect(`/surveys/${submission.id}`);
  const editable = can(user, "recordWork") && (submission.status === "draft" || submission.status === "returned");
  return { submission, results, units: user.units, editable };
}

export async function action(args: Route.ActionArgs) {
  const { user, submission } = await load(args);
  if (!can(user, "recordWork"))
    throw data("Only the contractor's technicians submit results for review.", { status: 403 });
  const values = await readForm(args.request);
  intentOf(values, ["submit"] as const);
  return formAction(values, async () => {
    const outcome = await submitForReview(db(), user, submission.id, requestIdOf(args.context), values.reply ?? "");
    return redirectWithFlash(`/submissions/${submission.id}`, {
      tone: "ok",
      message: `Submission ${outcome.reference} submitted to ${submission.ownerName}. Their integrity engineer will review it.`,
    });
  });
}

export default function Submission({ loaderData, actionData }: Route.ComponentProps) {
  const { submission, results, units, editable } = loaderData;
  const errors: Record<string, string> = actionData?.errors ?? {};
  const busy = useNavigation().state === "submitting";
  const flags = results.flatMap((r) => r.computed.flags.map((f) => ({ ...f, serial: r.couponSerial })));
  return (
    <div className="space-y-6">
      <PageHeader
        title={`Submission ${submission.reference}`}
        question={
          editable
            ? "Check every coupon's numbers, then send the submission to the owner. The server recomputes everything on submit."
            : "What this submission holds and where it stands."
        }
        actions={<Link to="/submissions">All submissions</Link>}
      >
        <div className="mt-2 flex flex-wrap items-center gap-2 text-sm">
          <StatusBadge status={submission.status} /> <span>revision {submission.revision}</span>
          {submission.worstSeverity ? (
            <span>
              · worst <SeverityBadge value={submission.worstSeverity as SeverityWord} />
            </span>
          ) : null}
        </div>
      </PageHeader>
      {submission.status === "returned" && submission.decisionComment ? (
        <FormAlert tone="warn">Returned by the owner’s engineer: {submission.decisionComment}</FormAlert>
      ) : null}
      {Object.keys(errors).length ? (
        <FormAlert>
          Not submitted.{" "}
          {Object.entries(errors).map(([k, v]) => (
            <span key={k}>
              {k === "form" ? "" : `${k}: `}
              {v}{" "}
            </span>
          ))}
        </FormAlert>
      ) : null}
      <Card title="Submission">
        <Facts
          items={[
            ["Site", `${submission.siteName} (${submission.siteCode}), times in ${submission.timeZone}`],
            ["Owner", submission.ownerName],
            ["Contractor", submission.contractorName],
            ["Started", formatLocal(submission.createdAt, submission.timeZone)],
            [
              "Submitted",
              submission.submittedAt ? formatLocal(submission.submittedAt, submission.timeZone) : "not yet",
            ],
            ["Quality flags", String(submission.status === "draft" ? flags.length : submission.flagCount)],
          ]}
        />
      </Card>
      {results.length === 0 ? (
        <EmptyState title="No results in this submission">
          Enter lab results for a removed coupon from the pull schedule.
        </EmptyState>
      ) : (
        <div className="overflow-x-auto rounded-lg border border-rule bg-panel">
          <table className="stack-table min-w-full text-sm">
            <TableHead
              labels={[
                "Point",
                "Coupon",
                "Exposure",
                "Mass loss",
                "General rate",
                "Pitting rate",
                "Pitting factor",
                "General severity",
                "Pitting severity",
                "Flags",
                "",
              ]}
            />
            <tbody>
              {results.map((r) => (
                <tr key={r.id} className="border-b border-rule last:border-0 align-top">
                  <Cell label="Point" className="font-medium">
                    {r.pointTag}
                    <div className="text-xs font-normal text-ink-faint">{r.circuitTag}</div>
                  </Cell>
                  <Cell label="Coupon">{r.couponSerial}</Cell>
                  <Cell label="Exposure" className="num">
                    {r.computed.exposureDays.toFixed(1)} d
                  </Cell>
                  <Cell label="Mass loss" className="num">
                    {formatGrams(r.computed.massLoss.correctedG)}
                  </Cell>
                  <Cell label="General rate" className="num">
                    {r.computed.rate ? (
                      formatQuantity("rate", r.computed.rate.mmPerYear, units)
                    ) : (
                      <NotDeterminable reason={r.computed.notDeterminableReason} />
                    )}
                  </Cell>
                  <Cell label="Pitting rate" className="num">
                    {r.computed.pitting ? formatQuantity("rate", r.computed.pitting.mmPerYear, units) : "—"}
                  </Cell>
                  <Cell label="Pitting factor" className="num">
                    {formatPittingFactor(r.computed.pitting?.factor)}
                  </Cell>
                  <Cell label="General severity">
                    <Grade
                      value={r.computed.severity.general}
                      basis={r.computed.severity.generalBasis}
                      emphasise={r.computed.severity.worstKind === "general"}
                    />
                  </Cell>
                  <Cell label="Pitting severity">
                    {r.computed.severity.pitting ? (
                      <SeverityBadge
                        value={r.computed.severity.pitting}
                        emphasise={r.computed.severity.worstKind === "pitting"}
                      />
                    ) : (
                      "—"
                    )}
                  </Cell>
                  <Cell label="Flags" className="num">
                    {r.computed.flags.length}
                  </Cell>
                  <Cell label="">
                    {editable ? (
                      <ButtonLink to={`/lab/${r.exposureId}`} className="px-2.5 py-1">
                        Edit
                      </ButtonLink>
                    ) : null}
                  </Cell>
                </tr>
              ))}
            </tbody>
          </table>
        </div>
      )}
      {flags.length > 0 ? (
        <Card title="Quality flags travelling with this submission">
          <ul className="space-y-1 text-sm">
            {flags.map((f, i) => (
              <li key={i} className={f.severity === "warning" ? "text-warn" : "text-ink-soft"}>
                <span className="font-medium">{f.serial}:</span> {f.message}
              </li>
            ))}
          </ul>
        </Card>
      ) : null}
      <EngineeringCaution />
      {editable ? (
        <Form method="post" className="space-y-3">
          <input type="hidden" name="intent" value="submit" />
          {submission.status === "returned" ? (
            <div className="max-w-2xl">
              <TextAreaField
                label="Your reply to the engineer (optional)"
                name="reply"
                rows={3}
                maxLength={4000}
                defaultValue={actionData && "values" in actionData ? (actionData.values?.reply ?? "") : ""}
                error={errors.reply}
                hint="What you changed or checked in answer to the return comment. The engineer sees it beside this revision."
              />
            </div>
          ) : null}
          <Button type="submit" disabled={busy || results.length === 0}>
            {busy ? "Submitting…" : `Submit to ${submission.ownerName}`}
          </Button>
        </Form>
      ) : null}
    </div>
  );
}

export const meta: Route.MetaFunction = ({ data }) => [
  { title: `Submission ${data?.submission.reference ?? ""} · Wallcast` },
];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
