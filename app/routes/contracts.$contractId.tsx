import { Form, useNavigation } from "react-router";
import { StatusBadge } from "~/components/badges";
import { Button, ButtonLink } from "~/components/button";
import { FormAlert, StaleAlert, TextField } from "~/components/field";
import { formFailure } from "~/components/form-failure";
import { Card, EmptyState, Facts, PageHeader } from "~/components/layout";
import { TickBox, tickedOf } from "~/components/tick-list";

import { AuditChangeList } from "~/components/audit-change-list";
import { listAudit } from "~/models/audit.server";
import { auditActionWords, auditChanges } from "~/services/audit-words";
import { formatLocal } from "~/services/time";
import {
  contractCalendar,
  contractSiteChoices,
  endContract,
  getContract,
  updateContract,
} from "~/models/contracts.server";
import { db } from "~/services/db.server";
import { redirectWithFlash } from "~/services/flash.server";
import { notFound, requireOwnerUser, requireUuid } from "~/services/guards.server";
import { can, scopeLabels, type ScopeOfWork } from "~/services/permissions";
import { formAction, intentOf, readForm } from "~/services/respond.server";
import { requestIdOf } from "~/services/problem.server";
import type { Route } from "./+types/contracts.$contractId";

const intents = ["update", "end"] as const;

export async function loader(args: Route.LoaderArgs) {
  const user = requireOwnerUser(args, "viewContracts");
  const contractId = requireUuid(args.params.contractId);
  const contract = await getContract(db(), user.ownerId, contractId);
  if (!contract) notFound();
  const canManage = can(user, "manageContracts");
  const [trail, sites, calendar] = await Promise.all([
    listAudit(db(), user.ownerId, { recordType: "contract", recordId: contract.id, limit: 200 }),
    canManage ? contractSiteChoices(db(), user.ownerId) : Promise.resolve([]),
    contractCalendar(db()),
  ]);
  return {
    canManage,
    calendar,
    timeZone: user.timeZone,
    siteChoices: sites,
    contract: {
      id: contract.id,
      reference: contract.reference,
      contractor: contract.contractor_name,
      scope: contract.scope,
      startsOn: contract.starts_on,
      endsOn: contract.ends_on,
      status: contract.status,
      sites: contract.sites,
      createdAt: new Date(contract.created_at).toISOString(),
      updatedAt: new Date(contract.updated_at).toISOString(),
      version: contract.version,
    },
    trail: trail.map((e) => ({
      id: e.id,
      at: new Date(e.created_at).toISOString(),
      actor: e.actor_label,
      action: e.action,
      reason: e.reason,
      changes: auditChanges(e.before, e.after, { units: user.units, timeZone: user.timeZone }),
    })),
  };
}

export async function action(args: Route.ActionArgs) {
  const user = requireOwnerUser(args, "manageContracts");
  const contractId = requireUuid(args.params.contractId);
  const requestId = requestIdOf(args.context);
  const values = await readForm(args.request);
  const intent = intentOf(values, intents);
  const text = (name: string) => values[name] ?? "";

  if (intent === "update")
    return formAction(values, async () => {
      const terms = {
        siteIds: tickedOf(values, "siteIds"),
        scope: tickedOf(values, "scope"),
        startsOn: text("startsOn"),
        endsOn: text("endsOn"),
        version: values.version,
      };
      const result = await updateContract(db(), user, contractId, terms, requestId);
      return redirectWithFlash(`/contracts/${contractId}`, {
        tone: result.changed ? "ok" : "warn",
        message: result.changed ? "Contract terms saved." : "Nothing changed: the terms were already as shown.",
      });
    });

  return formAction(values, async () => {
    const result = await endContract(
      db(),
      user,
      contractId,
      { endsOn: text("endsOn"), reason: text("reason"), version: values.version },
      requestId,
    );
    return redirectWithFlash(`/contracts/${contractId}`, {
      tone: "ok",
      message: `The contract’s last day is now ${result.endsOn}. From the day after, its technicians no longer see its sites.`,
    });
  });
}

export default function ContractDetail({ loaderData, actionData }: Route.ComponentProps) {
  const { contract, trail, canManage, siteChoices, calendar, timeZone } = loaderData;
  const navigation = useNavigation();
  const busy = navigation.state === "submitting";
  const edit = formFailure(actionData, { intent: "update" });
  const end = formFailure(actionData, { intent: "end" });
  const siteIds = new Set(contract.sites.map((s) => s.id));
  const scope = new Set<string>(contract.scope);
  const ended = contract.status === "ended";

  return (
    <div className="space-y-6">
      <PageHeader
        title={
          <span className="flex flex-wrap items-center gap-3">
            Contract {contract.reference} <StatusBadge status={contract.status} />
          </span>
        }
        question={`Where may ${contract.contractor} work for you, on what, and until when?`}
        actions={<ButtonLink to="/contracts">All contracts</ButtonLink>}
      />

      <div className={`grid gap-6 ${canManage ? "lg:grid-cols-2" : "max-w-3xl"}`}>
        <Card title="Terms">
          <Facts
            items={[
              ["Contractor", contract.contractor],
              ["Reference", contract.reference],
              ["Status", contract.status],
              ["First day", contract.startsOn],
              ["Last day", contract.endsOn ?? "open-ended"],
              ["Work", contract.scope.map((s) => scopeLabels[s]).join(", ")],
              ["Recorded", `${formatLocal(contract.createdAt, timeZone)} (${timeZone})`],
            ]}
          />
          <h3 className="mt-4 text-sm font-semibold text-ink">Sites covered</h3>
          <ul className="mt-1 list-inside list-disc text-sm">
            {contract.sites.map((s) => (
              <li key={s.id}>
                {s.name} <span className="text-ink-faint">({s.code})</span>
              </li>
            ))}
          </ul>
          <p className="mt-4 text-xs text-ink-faint">
            Status as of <span className="num">{calendar.today}</span>. The last day is included; the contractor’s
            technicians see these sites from the first day to the last and may record only the work named here.
          </p>
        </Card>

        {canManage ? (
          <Card title="Change the terms">
            {/* keyed by the saved version, so the fields show the new terms after a save */}
            <Form method="post" className="space-y-4" noValidate key={contract.updatedAt}>
              <input type="hidden" name="intent" value="update" />
              <input type="hidden" name="version" value={contract.version} />
              {edit.sent && actionData?.conflict && edit.errors.form ? (
                <StaleAlert message={edit.errors.form} />
              ) : edit.sent ? (
                <FormAlert>{edit.errors.form ?? "Nothing was saved: check the fields marked below."}</FormAlert>
              ) : null}
              <fieldset>
                <legend className="text-sm font-medium text-ink">Sites covered</legend>
                <div className="mt-2 grid gap-1.5 sm:grid-cols-2">
                  {siteChoices.map((s) => (
                    <TickBox
                      key={s.id}
                      form={edit}
                      list="siteIds"
                      value={s.id}
                      stored={siteIds.has(s.id)}
                      label={
                        <>
                          {s.name} <span className="text-ink-faint">({s.code})</span>
                        </>
                      }
                    />
                  ))}
                </div>
                {edit.errors.siteIds ? (
                  <p className="mt-1 text-xs font-medium text-bad" role="alert">
                    {edit.errors.siteIds}
                  </p>
                ) : null}
              </fieldset>
              <fieldset>
                <legend className="text-sm font-medium text-ink">Work the contractor may record</legend>
                <div className="mt-2 grid gap-1.5 sm:grid-cols-2">
                  {(Object.keys(scopeLabels) as ScopeOfWork[]).map((k) => (
                    <TickBox key={k} form={edit} list="scope" value={k} stored={scope.has(k)} label={scopeLabels[k]} />
                  ))}
                </div>
                {edit.errors.scope ? (
                  <p className="mt-1 text-xs font-medium text-bad" role="alert">
                    {edit.errors.scope}
                  </p>
                ) : null}
              </fieldset>
              <div className="grid gap-4 sm:grid-cols-2">
                <TextField
                  label="First day"
                  name="startsOn"
                  placeholder="YYYY-MM-DD"
                  autoComplete="off"
                  defaultValue={edit.value("startsOn", contract.startsOn)}
                  error={edit.errors.startsOn}
                />
                <TextField
                  label="Last day (optional)"
                  name="endsOn"
                  placeholder="YYYY-MM-DD"
                  autoComplete="off"
                  defaultValue={edit.value("endsOn", contract.endsOn ?? "")}
                  error={edit.errors.endsOn}
                  hint="Included. Empty means open-ended."
                />
              </div>
              <Button type="submit" variant="secondary" disabled={busy}>
                Save terms
              </Button>
            </Form>
          </Card>
        ) : null}
      </div>

      {canManage && !ended ? (
        <Card title="End contract">
          <Form
            method="post"
            className="grid gap-4 sm:grid-cols-[12rem_1fr_auto] sm:items-start"
            noValidate
            key={contract.updatedAt}
          >
            <input type="hidden" name="intent" value="end" />
            <input type="hidden" name="version" value={contract.version} />
            {end.sent && actionData?.conflict && end.errors.form ? (
              <div className="sm:col-span-3">
                <StaleAlert message={end.errors.form} />
              </div>
            ) : null}
            <TextField
              label="Last day"
              name="endsOn"
              placeholder="YYYY-MM-DD"
              autoComplete="off"
              defaultValue={end.value("endsOn", calendar.yesterday)}
              error={end.errors.endsOn}
              hint="Yesterday ends access today."
            />
            <TextField
              label="Reason (optional)"
              name="reason"
              defaultValue={end.value("reason")}
              error={end.errors.reason}
              hint="Kept in the audit trail."
            />
            <div className="sm:pt-6">
              <Button type="submit" variant="danger" disabled={busy}>
                End contract
              </Button>
            </div>
          </Form>
        </Card>
      ) : null}

      <Card title="History of this contract">
        {trail.length === 0 ? (
          <EmptyState title="No recorded changes">
            Changes to this contract’s terms are written here as they are made.
          </EmptyState>
        ) : (
          <div className="overflow-x-auto">
            <table className="min-w-full text-sm">
              <caption className="sr-only">Audit events of this contract, newest first</caption>
              <thead className="text-left text-xs uppercase tracking-wide text-ink-soft">
                <tr>
                  <th scope="col" className="border-b border-rule px-2 py-1.5 font-medium">
                    Time ({timeZone})
                  </th>
                  <th scope="col" className="border-b border-rule px-2 py-1.5 font-medium">
                    Who
                  </th>
                  <th scope="col" className="border-b border-rule px-2 py-1.5 font-medium">
                    What
                  </th>
                  <th scope="col" className="border-b border-rule px-2 py-1.5 font-medium">
                    Changes
                  </th>
                </tr>
              </thead>
              <tbody>
                {trail.map((e) => (
                  <tr key={e.id} className="border-b border-rule last:border-0 align-top">
                    <td className="num whitespace-nowrap px-2 py-1.5">{formatLocal(e.at, timeZone)}</td>
                    <td className="px-2 py-1.5">{e.actor}</td>
                    <td className="px-2 py-1.5">
                      {auditActionWords(e.action)}
                      {e.reason ? <div className="text-xs text-ink-soft">“{e.reason}”</div> : null}
                    </td>
                    <td className="px-2 py-1.5">
                      <AuditChangeList changes={e.changes} />
                    </td>
                  </tr>
                ))}
              </tbody>
            </table>
          </div>
        )}
        <p className="mt-2 text-xs text-ink-faint">
          The whole trail, filtered by record, is under{" "}
          <a href={`/audit?type=contract&id=${contract.id}`}>Audit trail</a>.
        </p>
      </Card>
    </div>
  );
}

export const meta: Route.MetaFunction = ({ data }) => [
  { title: `${data?.contract ? `Contract ${data.contract.reference}` : "Contract"} · Wallcast` },
];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
