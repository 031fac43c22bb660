import { keepPreviousData, useQuery } from "@tanstack/react-query";
import { useState } from "react";
import { Link } from "react-router";
import { SeverityBadge, StatusBadge, type SeverityWord } from "~/components/badges";
import { Cell, TableHead } from "~/components/table-head";
import { EmptyState, EngineeringCaution, PageHeader } from "~/components/layout";
import type { SubmissionSummary } from "~/models/submissions.server";
import { ownerSiteChoices } from "~/models/sites.server";
import { engagedContractors } from "~/models/users.server";
import { db } from "~/services/db.server";
import { requireOwnerUser } from "~/services/guards.server";
import { can } from "~/services/permissions";
import { formatLocal } from "~/services/time";
import type { Route } from "./+types/review";

export async function loader(args: Route.LoaderArgs) {
  const user = requireOwnerUser(args);
  const [sites, contractors] = await Promise.all([
    ownerSiteChoices(db(), user.ownerId),
    engagedContractors(db(), user.ownerId),
  ]);
  // The state to open with travels in the query string (the home page's cards link to it).
  const asked = new URL(args.request.url).searchParams.get("status");
  const status = asked !== null && queueStates.includes(asked) ? asked : "submitted";
  return { sites, contractors, decides: can(user, "decideSubmissions"), status };
}

const queueStates = ["submitted", "returned", "approved", "superseded", ""];

type Filters = {
  kind: string;
  site: string;
  contractor: string;
  status: string;
  worstSeverity: string;
  flagged: string;
  order: string;
};

async function fetchPage(
  filters: Filters,
  cursor: string | null,
): Promise<{ items: SubmissionSummary[]; nextCursor: string | null }> {
  const q = new URLSearchParams({ limit: "100" });
  for (const [k, v] of Object.entries(filters)) if (v) q.set(k, v);
  if (cursor) q.set("cursor", cursor);
  const res = await fetch(`/api/v1/submissions?${q}`, { headers: { Accept: "application/json" } });
  if (!res.ok) {
    const problem = (await res.json().catch(() => null)) as { detail?: string } | null;
    throw new Error(problem?.detail ?? `The list could not be loaded (HTTP ${res.status}).`);
  }
  return res.json();
}

/** Each kind of submission as the queue names it. */
const kindWords: Record<SubmissionSummary["kind"], string> = {
  coupon: "Coupon results",
  thickness: "Thickness survey",
};

const count = (n: number, word: string) => `${n} ${word}${n === 1 ? "" : "s"}`;

const select = "mt-0.5 block rounded-md border border-rule bg-white px-2 py-1.5 text-sm";

export default function ReviewQueue({ loaderData }: Route.ComponentProps) {
  const { sites, contractors, decides, status } = loaderData;
  const [filters, setFilters] = useState<Filters>({
    kind: "",
    site: "",
    contractor: "",
    status,
    worstSeverity: "",
    flagged: "",
    order: "oldest",
  });
  const [cursor, setCursor] = useState<string | null>(null);
  const [cursors, setCursors] = useState<Array<string | null>>([]);
  // Refreshes on its own: new submissions appear without a reload.
  const query = useQuery({
    queryKey: ["submissions", filters, cursor],
    queryFn: () => fetchPage(filters, cursor),
    refetchInterval: 15_000,
    placeholderData: keepPreviousData,
  });
  const set = (k: keyof Filters) => (e: { target: { value: string } }) => {
    setFilters((f) => ({ ...f, [k]: e.target.value }));
    // The address keeps the state shown, so a reload or a shared link opens the same list.
    if (k === "status") window.history.replaceState(null, "", `?status=${encodeURIComponent(e.target.value)}`);
    setCursor(null);
    setCursors([]);
  };
  const items = query.data?.items ?? [];
  return (
    <div className="space-y-4">
      <PageHeader
        title={decides ? "Review queue" : "Submissions"}
        question={
          decides
            ? "Which contractor submissions are waiting for your decision? Oldest first; open one to approve or return it."
            : "What contractors have submitted, and what was decided. Integrity engineers make the decisions."
        }
      />
      <div
        className="no-print flex flex-wrap items-end gap-3 rounded-lg border border-rule bg-panel p-3"
        role="search"
        aria-label="Filter submissions"
      >
        <label className="text-xs font-medium text-ink-soft">
          State
          <select value={filters.status} onChange={set("status")} className={select}>
            <option value="submitted">Waiting for review</option>
            <option value="returned">Returned to the contractor</option>
            <option value="approved">Approved</option>
            <option value="superseded">Superseded</option>
            <option value="">Any state</option>
          </select>
        </label>
        <label className="text-xs font-medium text-ink-soft">
          Kind
          <select value={filters.kind} onChange={set("kind")} className={select}>
            <option value="">Any kind</option>
            <option value="coupon">{kindWords.coupon}</option>
            <option value="thickness">{kindWords.thickness}</option>
          </select>
        </label>
        <label className="text-xs font-medium text-ink-soft">
          Site
          <select value={filters.site} onChange={set("site")} className={select}>
            <option value="">All sites</option>
            {sites.map((s) => (
              <option key={s.id} value={s.id}>
                {s.name}
              </option>
            ))}
          </select>
        </label>
        <label className="text-xs font-medium text-ink-soft">
          Contractor
          <select value={filters.contractor} onChange={set("contractor")} className={select}>
            <option value="">All contractors</option>
            {contractors.map((c) => (
              <option key={c.id} value={c.id}>
                {c.name}
              </option>
            ))}
          </select>
        </label>
        <label className="text-xs font-medium text-ink-soft">
          Worst severity
          <select value={filters.worstSeverity} onChange={set("worstSeverity")} className={select}>
            <option value="">Any</option>
            <option value="severe">severe</option>
            <option value="high">high</option>
            <option value="moderate">moderate</option>
            <option value="low">low</option>
          </select>
        </label>
        <label className="text-xs font-medium text-ink-soft">
          Quality flags
          <select value={filters.flagged} onChange={set("flagged")} className={select}>
            <option value="">With or without</option>
            <option value="true">Flagged only</option>
            <option value="false">No flags</option>
          </select>
        </label>
        <label className="text-xs font-medium text-ink-soft">
          Order
          <select value={filters.order} onChange={set("order")} className={select}>
            <option value="oldest">Oldest first</option>
            <option value="newest">Newest first</option>
          </select>
        </label>
        <p className="ml-auto text-xs text-ink-faint" aria-live="polite">
          {query.isFetching
            ? "Refreshing…"
            : query.dataUpdatedAt
              ? `Updated ${new Date(query.dataUpdatedAt).toLocaleTimeString("en-GB")}`
              : ""}
        </p>
      </div>
      {query.isError ? (
        <p role="alert" className="text-sm text-bad">
          {(query.error as Error).message} It will retry on its own.
        </p>
      ) : null}
      {query.isPending ? (
        <p className="text-sm text-ink-soft">Loading submissions…</p>
      ) : items.length === 0 ? (
        <EmptyState
          title={
            filters.status === "submitted" ? "Nothing is waiting for review" : "No submissions match these filters"
          }
        >
          {filters.status === "submitted"
            ? "When a contractor sends a submission it appears here within seconds. Contractors submit from their own Wallcast pages."
            : "Change or clear the filters above."}
        </EmptyState>
      ) : (
        <div className="space-y-3">
          <EngineeringCaution compact />
          <div className="overflow-x-auto rounded-lg border border-rule bg-panel">
            <table className="stack-table min-w-full text-sm">
              <caption className="sr-only">Submissions</caption>
              <TableHead
                labels={[
                  "Submission",
                  "Kind",
                  "State",
                  "Rev.",
                  "Site",
                  "Contractor",
                  "Results",
                  "Worst severity",
                  "Flags",
                  "Submitted (site time)",
                ]}
              />
              <tbody>
                {items.map((p) => (
                  <tr key={p.id} className="border-b border-rule last:border-0 hover:bg-tide-50/50">
                    <Cell label="Submission" className="font-medium">
                      <Link to={`/review/${p.id}`} className="whitespace-nowrap">
                        {p.reference}
                      </Link>
                    </Cell>
                    <Cell label="Kind">{kindWords[p.kind]}</Cell>
                    <Cell label="State">
                      <StatusBadge status={p.status} />
                    </Cell>
                    <Cell label="Rev." className="num">
                      {p.revision}
                    </Cell>
                    <Cell label="Site">{p.siteName}</Cell>
                    <Cell label="Contractor">{p.contractorName}</Cell>
                    <Cell label="Results" className="num text-right">
                      {p.kind === "thickness" ? count(p.resultCount, "reading") : count(p.resultCount, "coupon")}
                    </Cell>
                    <Cell label="Worst severity">
                      {p.worstSeverity ? (
                        <SeverityBadge value={p.worstSeverity as SeverityWord} />
                      ) : p.kind === "thickness" ? (
                        ""
                      ) : (
                        "—"
                      )}
                    </Cell>
                    <Cell label="Flags" className="num text-right">
                      {p.flagCount}
                    </Cell>
                    <Cell label="Submitted (site time)" className="num">
                      {p.submittedAt ? formatLocal(p.submittedAt, p.timeZone) : "—"}
                    </Cell>
                  </tr>
                ))}
              </tbody>
            </table>
          </div>
        </div>
      )}
      <div className="no-print flex gap-2">
        {cursors.length > 0 ? (
          <button
            type="button"
            className="rounded-md border border-rule px-3 py-1.5 text-sm"
            onClick={() => {
              const prev = cursors[cursors.length - 1];
              setCursors((c) => c.slice(0, -1));
              setCursor(prev);
            }}
          >
            Previous page
          </button>
        ) : null}
        {query.data?.nextCursor ? (
          <button
            type="button"
            className="rounded-md border border-rule px-3 py-1.5 text-sm"
            onClick={() => {
              setCursors((c) => [...c, cursor]);
              setCursor(query.data!.nextCursor);
            }}
          >
            Next page
          </button>
        ) : null}
      </div>
    </div>
  );
}

export const meta: Route.MetaFunction = () => [{ title: "Review queue · Wallcast" }];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
