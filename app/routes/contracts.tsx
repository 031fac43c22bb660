import { createColumnHelper } from "@tanstack/react-table";
import { Link } from "react-router";
import { ButtonLink } from "~/components/button";
import { StatusBadge } from "~/components/badges";
import { DataTable } from "~/components/data-table";
import { EmptyState, PageHeader } from "~/components/layout";
import { contractCalendar, listContracts } from "~/models/contracts.server";
import { db } from "~/services/db.server";
import { requireOwnerUser } from "~/services/guards.server";
import { can, scopeLabels } from "~/services/permissions";
import type { Route } from "./+types/contracts";

export async function loader(args: Route.LoaderArgs) {
  const user = requireOwnerUser(args, "viewContracts");
  const [contracts, { today }] = await Promise.all([listContracts(db(), user.ownerId), contractCalendar(db())]);
  return {
    today,
    canManage: can(user, "manageContracts"),
    contracts: contracts.map((c) => ({
      id: c.id,
      reference: c.reference,
      contractor: c.contractor_name,
      sites: c.sites.map((s) => ({ code: s.code, name: s.name })),
      scope: c.scope,
      startsOn: c.starts_on,
      endsOn: c.ends_on,
      status: c.status,
    })),
  };
}

type Row = Awaited<ReturnType<typeof loader>>["contracts"][number];
const col = createColumnHelper<Row>();
const statusOrder = { active: 0, upcoming: 1, ended: 2 } as const;

const columns = [
  col.accessor("reference", {
    header: "Reference",
    cell: ({ row: { original: c } }) => (
      <Link to={`/contracts/${c.id}`} className="font-medium">
        {c.reference}
      </Link>
    ),
  }),
  col.accessor("contractor", { header: "Contractor" }),
  col.accessor((c) => c.sites.map((s) => `${s.code} ${s.name}`).join(", "), {
    id: "sites",
    header: "Sites",
    cell: ({ row: { original: c } }) => (
      <span className="flex flex-wrap gap-1">
        {c.sites.map((s) => (
          <abbr
            key={s.code}
            title={s.name}
            className="rounded border border-rule bg-paper px-1.5 py-0.5 text-xs no-underline"
          >
            {s.code}
          </abbr>
        ))}
      </span>
    ),
  }),
  col.accessor((c) => c.scope.map((s) => scopeLabels[s]).join(", "), { id: "scope", header: "Work" }),
  col.accessor("startsOn", {
    header: "First day",
    cell: ({ getValue }) => <span className="num whitespace-nowrap">{getValue()}</span>,
  }),
  col.accessor((c) => c.endsOn ?? "9999-12-31", {
    id: "endsOn",
    header: "Last day",
    cell: ({ row: { original: c } }) => (
      <span className="num whitespace-nowrap">{c.endsOn ?? <span className="text-ink-faint">open-ended</span>}</span>
    ),
  }),
  col.accessor((c) => statusOrder[c.status], {
    id: "status",
    header: "Status",
    cell: ({ row: { original: c } }) => <StatusBadge status={c.status} />,
  }),
];

export default function Contracts({ loaderData }: Route.ComponentProps) {
  const { contracts, canManage, today } = loaderData;
  return (
    <div>
      <PageHeader
        title="Contracts"
        question="Which contractors may work at which of your sites, on what work, and until when?"
        actions={
          canManage ? (
            <ButtonLink to="/contracts/new" variant="primary">
              New contract
            </ButtonLink>
          ) : null
        }
      >
        <p className="mt-1 text-xs text-ink-faint">
          Status as of <span className="num">{today}</span>. A contractor’s technicians see a site only while an active
          contract covers it, and record only the work it names.
        </p>
      </PageHeader>
      <DataTable
        data={contracts}
        columns={columns}
        caption="Contracts with contractors"
        searchLabel="Find a contract"
        empty={
          <EmptyState
            title="No contracts yet"
            action={
              canManage ? (
                <ButtonLink to="/contracts/new" variant="primary">
                  New contract
                </ButtonLink>
              ) : null
            }
          >
            {canManage
              ? "Add a contract for each contractor you engage: its sites, the work it does and its dates. Then invite its technicians under People."
              : "Your administrator adds a contract for each contractor your organisation engages; they will be listed here."}
          </EmptyState>
        }
      />
    </div>
  );
}

export const meta: Route.MetaFunction = () => [{ title: "Contracts · Wallcast" }];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
