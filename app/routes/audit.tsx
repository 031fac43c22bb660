import { createColumnHelper } from "@tanstack/react-table";
import { Form, Link } from "react-router";
import { AuditChangeList } from "~/components/audit-change-list";
import { Button, ButtonLink, buttonClass } from "~/components/button";
import { DataTable } from "~/components/data-table";
import { SelectField, TextField } from "~/components/field";
import { EmptyState, PageHeader } from "~/components/layout";
import {
  auditFilterFrom,
  auditPage,
  auditRecordLabel,
  auditRecordTypes,
  lastFullVerification,
  runFullAuditVerification,
  verifyAuditSinceCheckpoint,
} from "~/models/audit.server";
import { auditActionWords, auditChanges } from "~/services/audit-words";
import { formatLocal } from "~/services/time";
import { db } from "~/services/db.server";
import { requireOwnerUser } from "~/services/guards.server";
import { redirectWithFlash } from "~/services/flash.server";
import { consumeLimit } from "~/services/rate-limit.server";
import { intentOf, pageLoad, readForm } from "~/services/respond.server";
import type { Route } from "./+types/audit";

const pageSize = 100;

export async function loader(args: Route.LoaderArgs) {
  const user = requireOwnerUser(args, "readAudit");
  await pageLoad(() => consumeLimit("auditViewsPerUser", user.id));
  // The filters and the page travel in the query string: a view can be bookmarked, and the CSV link carries the filters.
  const url = new URL(args.request.url);
  const filter = auditFilterFrom(url);
  const position = {
    before: url.searchParams.get("before") ?? undefined,
    after: url.searchParams.get("after") ?? undefined,
  };
  const [page, recordTypes, check, full] = await Promise.all([
    auditPage(db(), user.ownerId, filter, { limit: pageSize, ...position }),
    auditRecordTypes(db(), user.ownerId),
    verifyAuditSinceCheckpoint(db(), user.ownerId),
    lastFullVerification(db(), user.ownerId),
  ]);
  const reader = { units: user.units, timeZone: user.timeZone };
  return {
    filter,
    recordTypes,
    timeZone: user.timeZone,
    older: page.older,
    newer: page.newer,
    chain: {
      verified: check.verified,
      checked: check.checked,
      pending: check.pending,
      brokenEvents: [...new Set(check.broken.map((b) => b.id))],
    },
    full: full ? { ...full, finishedLocal: formatLocal(full.finishedAt, user.timeZone) } : null,
    events: page.events.map((e) => ({
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

/** "Re-verify the whole trail now": the full check the daily job runs, for this owner. */
export async function action(args: Route.ActionArgs) {
  const user = requireOwnerUser(args, "readAudit");
  intentOf(await readForm(args.request), ["verifyAll"] as const);
  const [report] = await runFullAuditVerification(db(), user.ownerId);
  const broken = new Set((report?.broken ?? []).map((b) => b.id)).size;
  return redirectWithFlash("/audit", {
    tone: broken ? "bad" : "ok",
    message: broken
      ? `The whole trail was re-verified: ${broken} of ${report?.events ?? 0} events are broken.`
      : `The whole trail was re-verified: all ${report?.events ?? 0} events are intact.`,
  });
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
  const { events, filter, recordTypes, chain, full, older, newer, timeZone } = loaderData;
  const filtered = Boolean(filter.recordType || filter.recordId);
  const query = new URLSearchParams();
  if (filter.recordType) query.set("type", filter.recordType);
  if (filter.recordId) query.set("id", filter.recordId);
  const csvHref = `/audit.csv${query.size ? `?${query}` : ""}`;
  const pageHref = (key: "before" | "after", id: string) => {
    const q = new URLSearchParams(query);
    q.set(key, id);
    return `/audit?${q}`;
  };
  const brokenNow = chain.brokenEvents;
  const brokenFull = full?.brokenIds ?? [];
  const intact = brokenNow.length === 0 && brokenFull.length === 0;
  const listed = (ids: string[]) => `${ids.slice(0, 10).join(", ")}${ids.length > 10 ? "…" : ""}`;

  return (
    <div className="space-y-4">
      <PageHeader
        title="Audit trail"
        question="Who changed what in your organisation’s records, when, and from what to what?"
        actions={
          <a href={csvHref} download className={buttonClass("secondary", "no-underline")}>
            Download CSV{filtered ? " (filtered)" : ""}
          </a>
        }
      />

      <div
        role="status"
        className={`space-y-1 rounded-md border px-3 py-2 text-sm ${intact ? "border-ok/40 bg-sev-low-bg text-ok" : "border-bad/40 bg-sev-severe-bg text-bad"}`}
      >
        <p>
          <strong className="font-semibold">
            Chain check:{" "}
            {brokenNow.length
              ? `${brokenNow.length} broken ${brokenNow.length === 1 ? "event" : "events"}`
              : brokenFull.length
                ? `${brokenFull.length} broken ${brokenFull.length === 1 ? "event" : "events"} at the last full check`
                : "intact"}
            .
          </strong>{" "}
          {brokenNow.length
            ? `Events ${listed(brokenNow)} no longer match their hashes or their place in the chain: the trail was altered outside Wallcast. Tell your administrator and keep a copy of this page.`
            : `${chain.verified} events verified: the ${chain.checked} recorded since the last check were re-hashed just now, each following the one before it.${chain.pending ? " Newer events are checked on the next view." : ""}`}
        </p>
        <p>
          {full
            ? `Last full re-verification ${full.finishedLocal}: ${full.events} events re-hashed from the first, ${
                brokenFull.length ? `broken: ${listed(brokenFull)}.` : "none broken."
              }`
            : "The whole trail has not been re-verified from its first event yet (it is every night)."}
        </p>
        <Form method="post" className="no-print">
          <input type="hidden" name="intent" value="verifyAll" />
          <Button type="submit" variant="secondary">
            Re-verify the whole trail now
          </Button>
        </Form>
      </div>

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

      <nav aria-label="Pages of the audit trail" className="no-print flex justify-between text-sm">
        {newer ? <Link to={pageHref("after", newer)}>← Newer events</Link> : <span />}
        {older ? <Link to={pageHref("before", older)}>Older events →</Link> : <span />}
      </nav>
    </div>
  );
}

export const meta: Route.MetaFunction = () => [{ title: "Audit trail · Wallcast" }];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
export { keepRetryAfter as headers } from "~/services/retry-after";
