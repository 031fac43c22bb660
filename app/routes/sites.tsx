import { createColumnHelper } from "@tanstack/react-table";
import { DataTable } from "~/components/data-table";
import { EmptyState, PageHeader } from "~/components/layout";
import { accessibleSites } from "~/models/sites.server";
import { db } from "~/services/db.server";
import { requireUser } from "~/services/guards.server";
import { scopeLabels, type ScopeOfWork } from "~/services/permissions";
import type { Route } from "./+types/sites";

export async function loader(args: Route.LoaderArgs) {
  const user = requireUser(args);
  const sites = await accessibleSites(db(), user);
  return {
    contractor: user.organisation.kind === "contractor",
    sites: sites.map((s) => ({
      id: s.id,
      name: s.name,
      code: s.code,
      timeZone: s.time_zone,
      owner: s.owner_name,
      scope: s.scope,
    })),
  };
}

type Row = Awaited<ReturnType<typeof loader>>["sites"][number];
const col = createColumnHelper<Row>();

export default function Sites({ loaderData }: Route.ComponentProps) {
  const { contractor, sites } = loaderData;
  const columns = [
    col.accessor("name", { header: "Site" }),
    col.accessor("code", { header: "Code" }),
    ...(contractor ? [col.accessor("owner", { header: "Owner" })] : []),
    col.accessor("timeZone", { header: "Time zone" }),
    ...(contractor
      ? [
          col.accessor((r) => r.scope.map((s) => scopeLabels[s as ScopeOfWork]).join(", "), {
            id: "scope",
            header: "Work you may record",
          }),
        ]
      : []),
  ];
  return (
    <div>
      <PageHeader
        title={contractor ? "My sites" : "Sites"}
        question={
          contractor
            ? "Which plants does a contract in force today let your company work at, and for what work?"
            : "The plants your organisation monitors."
        }
      />
      <DataTable
        data={sites}
        columns={columns}
        caption="Sites"
        empty={
          <EmptyState title={contractor ? "No contract in force covers any site" : "No sites yet"}>
            {contractor
              ? "When an owner engages your company, its administrator adds a contract for the sites and work you do; they appear here from its first day."
              : "An administrator or integrity engineer adds the organisation’s plants under set-up."}
          </EmptyState>
        }
      />
    </div>
  );
}

export const meta: Route.MetaFunction = () => [{ title: "Sites · Wallcast" }];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
