import { createColumnHelper } from "@tanstack/react-table";
import { useMemo, useState } from "react";
import { Link, useLocation } from "react-router";
import { StatusBadge } from "~/components/badges";
import { ButtonLink } from "~/components/button";
import { DataTable } from "~/components/data-table";
import { Card, EmptyState, PageHeader } from "~/components/layout";
import { pageNumberOf, Pager } from "~/components/pager";
import { awaitingLab, pullSchedule, type ScheduleRow } from "~/models/exposures.server";
import { DUE_RULE, DUE_SOON_DAYS } from "~/services/coupon-rules";
import { db } from "~/services/db.server";
import { requireUser } from "~/services/guards.server";
import { can } from "~/services/permissions";
import { formatLocal } from "~/services/time";
import type { Route } from "./+types/pulls";

export async function loader(args: Route.LoaderArgs) {
  const user = requireUser(args);
  // Each list of removed coupons pages on the server (?lab= and ?entered=).
  const url = new URL(args.request.url);
  const size = 25;
  const [rows, forLab, entered] = await Promise.all([
    pullSchedule(db(), user),
    awaitingLab(db(), user, { hasDraft: false }, { number: pageNumberOf(url, "lab"), size }),
    awaitingLab(db(), user, { hasDraft: true }, { number: pageNumberOf(url, "entered"), size }),
  ]);
  const view = (l: (typeof forLab.items)[number]) => ({
    exposureId: l.exposureId,
    pointTag: l.pointTag,
    siteName: l.siteName,
    couponSerial: l.couponSerial,
    removed: formatLocal(l.removedAt, l.timeZone),
    timeZone: l.timeZone,
    hasDraft: Boolean(l.has_draft),
  });
  const pageOf = (p: typeof forLab) => ({ items: p.items.map(view), total: p.total, number: p.number, size: p.size });
  return { canRecord: can(user, "recordWork"), rows, forLab: pageOf(forLab), entered: pageOf(entered) };
}

const col = createColumnHelper<ScheduleRow & { canRecord: boolean }>();
const stateOrder = { overdue: 0, due: 1, empty: 2, "in service": 3 } as const;

export default function Pulls({ loaderData }: Route.ComponentProps) {
  const { rows, forLab, entered, canRecord } = loaderData;
  const location = useLocation();
  const [site, setSite] = useState("");
  const [state, setState] = useState("");
  const sites = useMemo(() => [...new Set(rows.map((r) => r.siteName))], [rows]);
  const filtered = rows
    .filter((r) => (!site || r.siteName === site) && (!state || r.state === state))
    .map((r) => ({ ...r, canRecord }));
  const counts = {
    overdue: rows.filter((r) => r.state === "overdue").length,
    due: rows.filter((r) => r.state === "due").length,
  };
  const columns = [
    col.accessor((r) => stateOrder[r.state], {
      id: "state",
      header: "State",
      cell: (c) => <StatusBadge status={c.row.original.state} />,
    }),
    col.accessor("pointTag", { header: "Point", cell: (c) => <span className="font-medium">{c.getValue()}</span> }),
    col.accessor("siteName", { header: "Site" }),
    col.accessor("circuitTag", { header: "Circuit" }),
    col.accessor("orientation", { header: "Orientation" }),
    col.accessor((r) => r.couponSerial ?? "", {
      id: "coupon",
      header: "Coupon in service",
      cell: (c) => c.getValue() || "—",
    }),
    col.accessor((r) => r.installedAt ?? "", {
      id: "installed",
      header: "Installed (site time)",
      cell: (c) =>
        c.row.original.installedAt ? formatLocal(c.row.original.installedAt, c.row.original.timeZone) : "—",
    }),
    col.accessor((r) => r.daysInService ?? -1, {
      id: "days",
      header: "Days in service",
      meta: { align: "right" },
      cell: (c) => (c.row.original.daysInService === null ? "—" : `${c.row.original.daysInService} d`),
    }),
    col.accessor("plannedExposureDays", {
      header: "Planned",
      meta: { align: "right" },
      cell: (c) => `${c.getValue()} d`,
    }),
    col.accessor((r) => r.daysToDue ?? 99999, {
      id: "due",
      header: "Pull due",
      cell: (c) => {
        const r = c.row.original;
        if (!r.dueOn) return "—";
        const d = r.daysToDue ?? 0;
        return (
          <span className="num">
            {r.dueOn}{" "}
            <span className="text-ink-faint">({d < 0 ? `${-d} d overdue` : d === 0 ? "today" : `in ${d} d`})</span>
          </span>
        );
      },
    }),
    ...(canRecord
      ? [
          col.display({
            id: "act",
            header: "",
            cell: (c) => (
              <ButtonLink
                to={`/pulls/${c.row.original.pointId}/exchange`}
                variant={c.row.original.state === "in service" ? "secondary" : "primary"}
                className="whitespace-nowrap px-2.5 py-1"
              >
                {c.row.original.state === "empty" ? "Install a coupon" : "Record exchange"}
              </ButtonLink>
            ),
          }),
        ]
      : []),
  ];
  return (
    <div className="space-y-6">
      <PageHeader title="Pull schedule" question={`Which coupons are due or overdue for pulling? ${DUE_RULE}`}>
        <p className="mt-2 text-sm">
          <strong className="num">{counts.overdue}</strong> overdue · <strong className="num">{counts.due}</strong> due
          within {DUE_SOON_DAYS} days · {rows.length} points
        </p>
      </PageHeader>
      {[
        {
          id: "waiting-for-lab",
          title: "Removed coupons waiting for lab results",
          page: forLab,
          param: "lab",
          action: "Enter lab results",
        },
        {
          id: "entered-not-sent",
          title: "Lab results entered, not yet sent for review",
          page: entered,
          param: "entered",
          action: "Continue lab results",
        },
      ].map((group) =>
        group.page.total > 0 ? (
          <Card
            key={group.id}
            title={group.title}
            actions={
              canRecord && group.id === "waiting-for-lab" ? (
                <Link to="/lab-import" className="text-sm">
                  Import several from a CSV file
                </Link>
              ) : undefined
            }
          >
            <ul id={group.id} className="divide-y divide-rule text-sm">
              {group.page.items.map((l) => (
                <li key={l.exposureId} className="flex flex-wrap items-center gap-3 py-2">
                  <span className="font-medium whitespace-nowrap">{l.couponSerial}</span>
                  <span className="text-ink-soft">
                    from {l.pointTag} at {l.siteName}, removed {l.removed} ({l.timeZone})
                  </span>
                  {canRecord ? (
                    <ButtonLink to={`/lab/${l.exposureId}`} className="ml-auto px-2.5 py-1">
                      {group.action}
                    </ButtonLink>
                  ) : null}
                </li>
              ))}
            </ul>
            {group.page.total > group.page.size ? (
              <div className="mt-2">
                <Pager
                  total={group.page.total}
                  number={group.page.number}
                  size={group.page.size}
                  search={location.search}
                  param={group.param}
                  what="coupons"
                />
              </div>
            ) : null}
          </Card>
        ) : null,
      )}
      <DataTable
        data={filtered}
        columns={columns}
        caption="Coupon positions and their pulls"
        initialSorting={[{ id: "state", desc: false }]}
        searchLabel="Search points, circuits, coupons"
        toolbar={
          <>
            <label className="text-xs font-medium text-ink-soft">
              Site
              <select
                value={site}
                onChange={(e) => setSite(e.target.value)}
                className="mt-0.5 block rounded-md border border-rule bg-white px-2 py-1.5 text-sm"
              >
                <option value="">All sites</option>
                {sites.map((s) => (
                  <option key={s}>{s}</option>
                ))}
              </select>
            </label>
            <label className="text-xs font-medium text-ink-soft">
              State
              <select
                value={state}
                onChange={(e) => setState(e.target.value)}
                className="mt-0.5 block rounded-md border border-rule bg-white px-2 py-1.5 text-sm"
              >
                <option value="">Any state</option>
                <option value="overdue">Overdue</option>
                <option value="due">Due</option>
                <option value="in service">In service</option>
                <option value="empty">Empty (no coupon)</option>
              </select>
            </label>
          </>
        }
        empty={
          <EmptyState title="No coupon positions to look after">
            {canRecord
              ? "None of the sites your company's contracts cover has a coupon position yet, or no contract with coupon monitoring is in force today. The owner's engineer adds points under set-up."
              : "Add monitoring points under Set-up; they appear here with their pulls."}
          </EmptyState>
        }
      />
    </div>
  );
}

export const meta: Route.MetaFunction = () => [{ title: "Pull schedule · Wallcast" }];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
