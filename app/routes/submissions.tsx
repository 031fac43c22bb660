import { createColumnHelper } from "@tanstack/react-table";
import { Link, useLocation } from "react-router";
import { SeverityBadge, StatusBadge, type SeverityWord } from "~/components/badges";
import { DataTable } from "~/components/data-table";
import { EmptyState, EngineeringCaution, PageHeader } from "~/components/layout";
import { pageNumberOf, Pager } from "~/components/pager";
import { submissionsPage, type SubmissionSummary } from "~/models/submissions.server";
import { db } from "~/services/db.server";
import { requireUser } from "~/services/guards.server";
import { formatLocal } from "~/services/time";
import type { Route } from "./+types/submissions";

const statusWords: Record<string, string> = {
  draft: "drafts",
  submitted: "submissions waiting for the owner's review",
  returned: "submissions returned by the owner",
  approved: "approved submissions",
  superseded: "superseded submissions",
};

export async function loader(args: Route.LoaderArgs) {
  const user = requireUser(args);
  // ?status=returned (the home page's card) shows that state only; anything else shows all.
  const url = new URL(args.request.url);
  const asked = url.searchParams.get("status") ?? "";
  const status = Object.hasOwn(statusWords, asked) ? asked : undefined;
  const page = await submissionsPage(db(), user, { status }, { number: pageNumberOf(url), size: pageSize });
  return { contractor: user.organisation.kind === "contractor", ...page, status: status ?? null };
}

const pageSize = 50;

const col = createColumnHelper<SubmissionSummary>();

const kindWords: Record<SubmissionSummary["kind"], string> = {
  coupon: "coupon results",
  thickness: "thickness survey",
};

/** A contractor opens a survey on its grid; everything else on the submission's page. */
const linkOf = (s: SubmissionSummary, contractor: boolean) =>
  contractor && s.kind === "thickness" ? `/surveys/${s.id}` : `/submissions/${s.id}`;

export default function Submissions({ loaderData }: Route.ComponentProps) {
  const { contractor, items, status, total, number, size } = loaderData;
  const { search } = useLocation();
  const columns = [
    col.accessor("reference", {
      header: "Submission",
      cell: (c) => (
        <Link to={linkOf(c.row.original, contractor)} className="font-medium">
          {c.getValue()}
        </Link>
      ),
    }),
    col.accessor("kind", { header: "Kind", cell: (c) => kindWords[c.getValue()] }),
    col.accessor("status", { header: "State", cell: (c) => <StatusBadge status={c.getValue()} /> }),
    col.accessor("revision", { header: "Rev.", meta: { align: "right" } }),
    col.accessor("siteName", { header: "Site" }),
    ...(contractor
      ? [col.accessor("ownerName", { header: "Owner" })]
      : [col.accessor("contractorName", { header: "Contractor" })]),
    col.accessor("resultCount", {
      header: "Results",
      meta: { align: "right" },
      cell: (c) =>
        `${c.getValue()} ${c.row.original.kind === "thickness" ? (c.getValue() === 1 ? "reading" : "readings") : c.getValue() === 1 ? "coupon" : "coupons"}`,
    }),
    col.accessor((r) => ["low", "moderate", "high", "severe"].indexOf(r.worstSeverity ?? ""), {
      id: "worst",
      header: "Worst severity",
      cell: (c) =>
        c.row.original.worstSeverity ? (
          <SeverityBadge value={c.row.original.worstSeverity as SeverityWord} />
        ) : c.row.original.kind === "thickness" ? (
          ""
        ) : (
          "—"
        ),
    }),
    col.accessor("flagCount", { header: "Flags", meta: { align: "right" } }),
    col.accessor((r) => r.submittedAt ?? r.createdAt, {
      id: "when",
      header: "Submitted (site time)",
      cell: (c) =>
        c.row.original.submittedAt ? formatLocal(c.row.original.submittedAt, c.row.original.timeZone) : "not yet",
    }),
  ];
  return (
    <div>
      <PageHeader
        title={"Submissions"}
        question={
          contractor
            ? "Your company's coupon results and thickness surveys: drafts to finish, submissions with the owner, and what came back."
            : "Coupon results and thickness surveys your contractors have submitted, and where each one stands."
        }
      />
      {status ? (
        <p className="mb-3 text-sm">
          Showing {statusWords[status]} only. <Link to="/submissions">Show all submissions</Link>
        </p>
      ) : null}
      <Pager total={total} number={number} size={size} search={search} what="submissions" />
      <DataTable
        data={items}
        columns={columns}
        caption="Submissions"
        initialSorting={[{ id: "when", desc: true }]}
        empty={
          <EmptyState title={status ? `No ${statusWords[status]}` : "No submissions yet"}>
            {contractor
              ? "A submission starts when you save the lab results of a removed coupon: record an exchange on the pull schedule, then enter its lab results."
              : "Submissions appear here once a contractor submits them."}
          </EmptyState>
        }
      />
      {items.some((i) => i.worstSeverity) ? (
        <div className="mt-3">
          <EngineeringCaution compact />
        </div>
      ) : null}
    </div>
  );
}

export const meta: Route.MetaFunction = () => [{ title: "Submissions · Wallcast" }];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
