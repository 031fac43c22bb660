import { createColumnHelper } from "@tanstack/react-table";
import { Link } from "react-router";
import { SeverityBadge, StatusBadge, type SeverityWord } from "~/components/badges";
import { DataTable } from "~/components/data-table";
import { EmptyState, EngineeringCaution, PageHeader } from "~/components/layout";
import { listSubmissions, type SubmissionSummary } from "~/models/submissions.server";
import { db } from "~/services/db.server";
import { requireUser } from "~/services/guards.server";
import { formatLocal } from "~/services/time";
import type { Route } from "./+types/packets";

export async function loader(args: Route.LoaderArgs) {
  const user = requireUser(args);
  const { items } = await listSubmissions(db(), user, {}, { limit: 200 });
  return { contractor: user.organisation.kind === "contractor", items };
}

const col = createColumnHelper<SubmissionSummary>();

export default function Packets({ loaderData }: Route.ComponentProps) {
  const { contractor, items } = loaderData;
  const columns = [
    col.accessor("reference", {
      header: "Packet",
      cell: (c) => (
        <Link to={`/packets/${c.row.original.id}`} className="font-medium">
          {c.getValue()}
        </Link>
      ),
    }),
    col.accessor("status", { header: "State", cell: (c) => <StatusBadge status={c.getValue()} /> }),
    col.accessor("revision", { header: "Rev.", meta: { align: "right" } }),
    col.accessor("siteName", { header: "Site" }),
    ...(contractor
      ? [col.accessor("ownerName", { header: "Owner" })]
      : [col.accessor("contractorName", { header: "Contractor" })]),
    col.accessor("resultCount", { header: "Coupons", meta: { align: "right" } }),
    col.accessor((r) => ["low", "moderate", "high", "severe"].indexOf(r.worstSeverity ?? ""), {
      id: "worst",
      header: "Worst severity",
      cell: (c) =>
        c.row.original.worstSeverity ? <SeverityBadge value={c.row.original.worstSeverity as SeverityWord} /> : "—",
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
        title={contractor ? "Packets" : "Submissions"}
        question={
          contractor
            ? "Your company's coupon packets: drafts to finish, packets with the owner, and what came back."
            : "Coupon packets your contractors have submitted, and where each one stands."
        }
      />
      <DataTable
        data={items}
        columns={columns}
        caption="Packets"
        initialSorting={[{ id: "when", desc: true }]}
        empty={
          <EmptyState title="No packets yet">
            {contractor
              ? "A packet starts when you save the lab results of a removed coupon: record an exchange on the pull schedule, then enter its lab results."
              : "Packets appear here once a contractor submits them."}
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

export const meta: Route.MetaFunction = () => [{ title: "Packets · Wallcast" }];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
