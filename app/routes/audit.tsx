import { createColumnHelper } from "@tanstack/react-table";
import { Form, Link } from "react-router";
import { AuditChangeList } from "~/components/audit-change-list";
import { Button, ButtonLink } from "~/components/button";
import { DataTable } from "~/components/data-table";
import { SelectField, TextField } from "~/components/field";
import { EmptyState, PageHeader } from "~/components/layout";
import {
  auditFilterFrom,
  auditRecordLabel,
  auditRecordTypes,
  listAudit,
  verifyAuditChain,
} from "~/models/audit.server";
import { auditActionWords, auditChanges } from "~/services/audit-words";
import { formatLocal } from "~/services/time";
import { db } from "~/services/db.server";
import { requireOwnerUser } from "~/services/guards.server";
import { consumeLimit } from "~/services/rate-limit.server";
import { pageLoad } from "~/services/respond.server";
import type { Route } from "./+types/audit";

const shown = 500;

export async function loader(args: Route.LoaderArgs) {
  const user = requireOwnerUser(args, "readAudit");
  await pageLoad(() => consumeLimit("auditViewsPerUser", user.id));
  // The filters travel in the query string: a filtered view can be bookmarked, and the CSV link carries them.
  const filter = auditFilterFrom(new URL(args.request.url));
  const [events, recordTypes, chain] = await Promise.all([
    listAudit(db(), user.ownerId, { ...filter, limit: shown }),
    auditRecordTypes(db(), user.ownerId),
    verifyAuditChain(db(), user.ownerId),
  ]);
  const report = chain[0] ?? { events: 0, broken: [] };
  const reader = { units: user.units, timeZone: user.timeZone };
  return {
    filter,
    recordTypes,
    timeZone: user.timeZone,
    limited: events.length === shown,
    chain: {
      events: report.events,
      brokenEvents: [...new Set(report.broken.map((b) => b.id))],
      problems: report.broken.slice(0, 20),
    },
    events: events.map((e) => ({
      id: e.id,
      at: new Date(e.created_at).toISOString(),
      atLocal: formatLocal(e.created_at, user.timeZone),
      actor: e.actor_label,
      action: e.action,
      recordType: e.record_type,
      recordId: e.record_id,
      recordLabel: auditRecordLabel(e.before, e.after),
      reason: e.reason,
      changes: auditChanges(e.before, e.after, reader),
    })),
  };
}

type Event = Awaited<ReturnType<typeof loader>>["events"][number];
const col = createColumnHelper<Event>();

const recordLink = (e: Event) => (e.recordType === "contract" ? `/contracts/${e.recordId}` : null);

const columns = [
  col.accessor((e) => Number(e.id), {
    id: "id",
    header: "No.",
    meta: { align: "right" },
    cell: ({ row: { original: e } }) => e.id,
  }),
  col.accessor("at", {
    header: "Time",
    cell: ({ row: { original: e } }) => (
      <time dateTime={e.at} className="num whitespace-nowrap">
        {e.atLocal}
      </time>
    ),
  }),
  col.accessor("actor", { header: "Who" }),
  col.accessor((e) => auditActionWords(e.action), {
    id: "action",
    header: "What",
    cell: ({ row: { original: e } }) => (
      <span>
        {auditActionWords(e.action)}
        <code className="block text-[0.7rem] text-ink-faint">{e.action}</code>
      </span>
    ),
  }),
  col.accessor((e) => `${e.recordType} ${e.recordLabel ?? ""} ${e.recordId}`, {
    id: "record",
    header: "Record",
    cell: ({ row: { original: e } }) => {
      const href = recordLink(e);
      return (
        <div className="text-xs">
          <div className="font-medium text-ink">
            {e.recordType}
            {e.recordLabel ? <span className="font-normal text-ink-soft"> · {e.recordLabel}</span> : null}
          </div>
          {href ? (
            <Link to={href} className="font-mono" title={e.recordId}>
              {e.recordId.slice(0, 8)}…
            </Link>
          ) : (
            <span className="font-mono text-ink-soft" title={e.recordId}>
              {e.recordId.length > 12 ? `${e.recordId.slice(0, 8)}…` : e.recordId}
            </span>
          )}{" "}
          <Link
            to={`?type=${encodeURIComponent(e.recordType)}&id=${encodeURIComponent(e.recordId)}`}
            className="no-print whitespace-nowrap"
            aria-label={`Only events of ${e.recordType} ${e.recordId}`}
          >
            only this
          </Link>
        </div>
      );
    },
  }),
  col.accessor((e) => e.reason ?? "", {
    id: "reason",
    header: "Reason",
    cell: ({ getValue }) =>
      getValue() ? <span className="text-xs">{getValue()}</span> : <span className="text-ink-faint">—</span>,
  }),
  col.accessor((e) => e.changes.map((c) => `${c.field} ${c.before ?? ""} ${c.after ?? ""}`).join(" "), {
    id: "changes",
    header: "Before → after",
    enableSorting: false,
    cell: ({ row: { original: e } }) => <AuditChangeList changes={e.changes} />,
  }),
];

export default function Audit({ loaderData }: Route.ComponentProps) {
  const { events, filter, recordTypes, chain, limited, timeZone } = loaderData;
  const filtered = Boolean(filter.recordType || filter.recordId);
  const query = new URLSearchParams();
  if (filter.recordType) query.set("type", filter.recordType);
  if (filter.recordId) query.set("id", filter.recordId);
  const csvHref = `/audit.csv${query.size ? `?${query}` : ""}`;
  const intact = chain.brokenEvents.length === 0;

  return (
    <div className="space-y-4">
      <PageHeader
        title="Audit trail"
        question="Who changed what in your organisation’s records, when, and from what to what?"
        actions={
          <a
            href={csvHref}
            download
            className="inline-flex items-center rounded-md border border-rule bg-panel px-3.5 py-2 text-sm font-medium text-ink no-underline hover:bg-tide-50"
          >
            Download CSV{filtered ? " (filtered)" : ""}
          </a>
        }
      />

      <p
        role="status"
        className={`rounded-md border px-3 py-2 text-sm ${intact ? "border-ok/40 bg-sev-low-bg text-ok" : "border-bad/40 bg-sev-severe-bg text-bad"}`}
      >
        <strong className="font-semibold">
          Chain check:{" "}
          {intact
            ? "intact"
            : `${chain.brokenEvents.length} broken ${chain.brokenEvents.length === 1 ? "event" : "events"}`}
          .
        </strong>{" "}
        {intact
          ? `All ${chain.events} events of the trail were re-hashed just now and each follows the one before it.`
          : `Events ${chain.brokenEvents.slice(0, 10).join(", ")}${chain.brokenEvents.length > 10 ? "…" : ""} no longer match their hashes or their place in the chain: the trail was altered outside Wallcast. Tell your administrator and keep a copy of this page.`}
      </p>

      <Form
        method="get"
        className="no-print flex flex-wrap items-end gap-3"
        role="search"
        aria-label="Filter the audit trail"
      >
        <div className="w-52">
          <SelectField label="Record type" name="type" defaultValue={filter.recordType ?? ""}>
            <option value="">All records</option>
            {recordTypes.map((t) => (
              <option key={t} value={t}>
                {t}
              </option>
            ))}
            {filter.recordType && !recordTypes.includes(filter.recordType) ? (
              <option value={filter.recordType}>{filter.recordType}</option>
            ) : null}
          </SelectField>
        </div>
        <div className="w-80">
          <TextField
            label="Record id"
            name="id"
            defaultValue={filter.recordId ?? ""}
            placeholder="e.g. a contract’s id"
            autoComplete="off"
          />
        </div>
        <Button type="submit" variant="secondary">
          Show
        </Button>
        {filtered ? (
          <ButtonLink to="/audit" variant="quiet">
            Clear filter
          </ButtonLink>
        ) : null}
      </Form>

      <p className="text-xs text-ink-faint">
        Times in {timeZone} (<Link to="/profile">change on your profile</Link>); the CSV keeps each time in UTC.
      </p>

      {limited ? (
        <p className="text-xs text-ink-faint">
          Showing the newest {events.length} events. Filter by record, or download the CSV for up to 10,000.
        </p>
      ) : null}

      <DataTable
        data={events}
        columns={columns}
        caption="Audit events, newest first"
        searchLabel="Search these events"
        empty={
          filtered ? (
            <EmptyState
              title="No events match this filter"
              action={<ButtonLink to="/audit">Show the whole trail</ButtonLink>}
            >
              Check the record type and id; ids are shown in full when you hover over them in the trail.
            </EmptyState>
          ) : (
            <EmptyState title="Nothing recorded yet">
              Every change made in Wallcast — people invited, contracts added or ended, API clients created — is written
              here as it happens.
            </EmptyState>
          )
        }
      />
    </div>
  );
}

export const meta: Route.MetaFunction = () => [{ title: "Audit trail · Wallcast" }];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
export { keepRetryAfter as headers } from "~/services/retry-after";
