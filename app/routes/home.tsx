import { Link } from "react-router";
import { SeverityBadge, type SeverityWord } from "~/components/badges";
import { ButtonLink } from "~/components/button";
import { Card, EmptyState, EngineeringCaution, PageHeader } from "~/components/layout";
import { userContext } from "~/context";
import { awaitingLab, pullSchedule } from "~/models/exposures.server";
import { countSubmissions, listSubmissions } from "~/models/submissions.server";
import { accessibleSites } from "~/models/sites.server";
import { db } from "~/services/db.server";
import { can, roleLabels, scopeLabels, type ScopeOfWork } from "~/services/permissions";
import { safeRedirect } from "~/services/safe-redirect";
import { formatLocal } from "~/services/time";
import type { Route } from "./+types/home";

export async function loader({ request, context }: Route.LoaderArgs) {
  const user = context.get(userContext);
  const url = new URL(request.url);
  if (!user) {
    const redirectTo = safeRedirect(url.searchParams.get("redirectTo"), "/");
    return { signedIn: false as const, signInRequired: url.searchParams.get("signin") === "required", redirectTo };
  }
  const conn = db();
  const contractor = user.organisation.kind === "contractor";
  const [sites, schedule, waiting, returned, drafts, forLab, entered, waitingCount, returnedCount] = await Promise.all([
    accessibleSites(conn, user),
    pullSchedule(conn, user),
    contractor
      ? Promise.resolve(null)
      : listSubmissions(conn, user, { status: "submitted", order: "oldest" }, { limit: 5 }),
    listSubmissions(conn, user, { status: "returned" }, { limit: 5 }),
    contractor ? listSubmissions(conn, user, { status: "draft" }, { limit: 5 }) : Promise.resolve(null),
    contractor ? awaitingLab(conn, user, { hasDraft: false }, { number: 1, size: 1 }) : Promise.resolve(null),
    contractor ? awaitingLab(conn, user, { hasDraft: true }, { number: 1, size: 1 }) : Promise.resolve(null),
    contractor ? Promise.resolve(0) : countSubmissions(conn, user, "submitted"),
    countSubmissions(conn, user, "returned"),
  ]);
  const serious = contractor
    ? null
    : await listSubmissions(conn, user, { status: "approved", worstSeverity: "severe" }, { limit: 3 });
  return {
    signedIn: true as const,
    name: user.name || user.email,
    role: user.role,
    organisation: user.organisation.name,
    contractor,
    decides: can(user, "decideSubmissions"),
    sites: sites.map((s) => ({ id: s.id, name: s.name, code: s.code, owner: s.owner_name, scope: s.scope })),
    overdue: schedule
      .filter((r) => r.state === "overdue")
      .map((r) => ({ point: r.pointTag, site: r.siteName, dueOn: r.dueOn, days: -(r.daysToDue ?? 0) })),
    dueSoon: schedule.filter((r) => r.state === "due").length,
    empty: schedule.filter((r) => r.state === "empty").length,
    waiting: waiting?.items ?? [],
    waitingCount,
    returned: returned.items,
    returnedCount,
    drafts: drafts?.items ?? [],
    // Only coupons with no lab results yet; those entered in a draft wait for submission, not for the lab.
    awaitingLab: forLab?.total ?? 0,
    enteredNotSent: entered?.total ?? 0,
    serious: serious?.items ?? [],
  };
}

export default function Home({ loaderData }: Route.ComponentProps) {
  if (!loaderData.signedIn) {
    const href =
      loaderData.redirectTo === "/"
        ? "/auth/login"
        : `/auth/login?redirectTo=${encodeURIComponent(loaderData.redirectTo)}`;
    return (
      <div className="mx-auto max-w-2xl">
        <PageHeader
          title="Wallcast"
          question="Corrosion-coupon, wall-thickness and lab data from your contractors — computed, reviewed and approved in one place."
        />
        <Card title={loaderData.signInRequired ? "Sign in to continue" : "Sign in"}>
          <p className="text-sm text-ink-soft">
            {loaderData.signInRequired
              ? "That page needs you to be signed in. Sign in with your organisation’s account and you will be taken back to it."
              : "Sign in with your organisation’s account. Your administrator must have invited your e-mail address first."}
          </p>
          <div className="mt-4">
            <ButtonLink to={href} variant="primary">
              Sign in
            </ButtonLink>
          </div>
        </Card>
      </div>
    );
  }
  const d = loaderData;
  const first = d.name.split(" ")[0];
  return (
    <div className="space-y-6">
      <PageHeader
        title={`Today, ${first}`}
        question={
          d.contractor
            ? "Which pulls are due, which submissions need finishing, and what came back from the owner?"
            : d.decides
              ? "What is waiting for your decision, and which pulls are late?"
              : "Where the plant stands: late pulls, submissions under review and serious results."
        }
      >
        <p className="mt-1 text-xs text-ink-faint">
          {roleLabels[d.role]} · {d.organisation}
        </p>
      </PageHeader>

      <div className="grid gap-4 md:grid-cols-3">
        {d.contractor ? (
          <>
            <Stat
              label="Overdue pulls"
              value={d.overdue.length}
              to="/pulls"
              hint={`${d.dueSoon} more due within 14 days`}
              tone={d.overdue.length ? "bad" : "ok"}
            />
            <Stat
              label="Coupons waiting for lab results"
              value={d.awaitingLab}
              to="/pulls#waiting-for-lab"
              hint={
                d.enteredNotSent
                  ? `${d.enteredNotSent} more entered in a draft, not yet sent`
                  : "Enter them one by one or import a CSV"
              }
            />
            <Stat
              label="Returned by the owner"
              value={d.returnedCount}
              to="/submissions?status=returned"
              hint="Submissions to correct and resubmit"
              tone={d.returnedCount ? "warn" : "ok"}
            />
          </>
        ) : (
          <>
            <Stat
              label={d.decides ? "Submissions waiting for your review" : "Submissions under review"}
              value={d.waitingCount}
              to="/review?status=submitted"
              hint={
                d.waiting[0]?.submittedAt
                  ? `oldest submitted ${formatLocal(d.waiting[0].submittedAt, d.waiting[0].timeZone)}`
                  : "none waiting"
              }
              tone={d.waiting.length ? "warn" : "ok"}
            />
            <Stat
              label="Overdue coupon pulls"
              value={d.overdue.length}
              to="/pulls"
              hint={`${d.dueSoon} more due within 14 days`}
              tone={d.overdue.length ? "bad" : "ok"}
            />
            <Stat
              label="Returned to contractors"
              value={d.returnedCount}
              to="/review?status=returned"
              hint="waiting for a new revision"
            />
          </>
        )}
      </div>

      {d.contractor && d.drafts.length > 0 ? (
        <Card title="Draft submissions to finish">
          <ul className="text-sm">
            {d.drafts.map((p) => (
              <li key={p.id} className="py-1">
                <Link to={`/submissions/${p.id}`} className="font-medium">
                  {p.reference}
                </Link>{" "}
                · {p.siteName} · {p.resultCount} coupon(s) — not yet submitted
              </li>
            ))}
          </ul>
        </Card>
      ) : null}

      {d.overdue.length > 0 ? (
        <Card
          title="Overdue pulls"
          actions={
            <Link to="/pulls" className="text-sm">
              Pull schedule
            </Link>
          }
        >
          <ul className="text-sm">
            {d.overdue.slice(0, 8).map((o) => (
              <li key={o.point} className="py-1 num">
                <span className="font-medium">{o.point}</span> at {o.site} — due {o.dueOn}, {o.days} d overdue
              </li>
            ))}
          </ul>
        </Card>
      ) : null}

      {!d.contractor && d.serious.length > 0 ? (
        <Card title="Recently approved submissions graded severe">
          <ul className="text-sm">
            {d.serious.map((p) => (
              <li key={p.id} className="flex items-center gap-2 py-1">
                <SeverityBadge value={p.worstSeverity as SeverityWord} />
                <Link to={`/review/${p.id}`}>{p.reference}</Link> · {p.siteName} · approved{" "}
                {p.decidedAt ? formatLocal(p.decidedAt, p.timeZone) : ""}
              </li>
            ))}
          </ul>
          <div className="mt-3">
            <EngineeringCaution compact />
          </div>
        </Card>
      ) : null}

      <section>
        <h2 className="mb-2 text-base font-semibold">{d.contractor ? "Where you may work today" : "Your plants"}</h2>
        {d.sites.length === 0 ? (
          <EmptyState title={d.contractor ? "No contract in force covers any site" : "No sites yet"}>
            {d.contractor
              ? "An owner’s administrator adds a contract for the sites and work your company does; it appears here from its first day."
              : "Add your plants under Set-up to start receiving contractor data."}
          </EmptyState>
        ) : (
          <div className="grid gap-4 sm:grid-cols-2 lg:grid-cols-3">
            {d.sites.map((s) => (
              <Card key={s.id} title={s.name}>
                <p className="text-sm text-ink-soft">
                  {s.code}
                  {d.contractor ? ` · for ${s.owner}` : ""}
                </p>
                {d.contractor ? (
                  <p className="mt-2 text-sm">
                    You may record: {s.scope.map((x) => scopeLabels[x as ScopeOfWork]).join(", ")}
                  </p>
                ) : null}
              </Card>
            ))}
          </div>
        )}
      </section>
    </div>
  );
}

function Stat({
  label,
  value,
  hint,
  to,
  tone = "ok",
}: {
  label: string;
  value: number;
  hint?: string;
  to: string;
  tone?: "ok" | "warn" | "bad";
}) {
  const toneClass = { ok: "text-ink", warn: "text-sev-moderate", bad: "text-sev-severe" }[tone];
  return (
    <Link to={to} className="block rounded-lg border border-rule bg-panel p-4 no-underline hover:border-tide-300">
      <p className="text-sm text-ink-soft">{label}</p>
      <p className={`num mt-1 text-3xl font-semibold ${toneClass}`}>{value}</p>
      {hint ? <p className="mt-1 text-xs text-ink-faint">{hint}</p> : null}
    </Link>
  );
}

export const meta: Route.MetaFunction = () => [{ title: "Today · Wallcast" }];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
