import { Link } from "react-router";
import { ButtonLink } from "~/components/button";
import { Card, EmptyState, PageHeader } from "~/components/layout";
import { userContext } from "~/context";
import { accessibleSites } from "~/models/sites.server";
import { db } from "~/services/db.server";
import { safeRedirect } from "~/services/safe-redirect";
import { roleLabels, scopeLabels, type ScopeOfWork } from "~/services/permissions";
import type { Route } from "./+types/home";

export async function loader({ request, context }: Route.LoaderArgs) {
  const user = context.get(userContext);
  const url = new URL(request.url);
  if (!user) {
    const redirectTo = safeRedirect(url.searchParams.get("redirectTo"), "/");
    return { signedIn: false as const, signInRequired: url.searchParams.get("signin") === "required", redirectTo };
  }
  const sites = await accessibleSites(db(), user);
  return {
    signedIn: true as const,
    name: user.name || user.email,
    role: user.role,
    organisation: user.organisation.name,
    contractor: user.organisation.kind === "contractor",
    sites: sites.map((s) => ({ id: s.id, name: s.name, code: s.code, owner: s.owner_name, scope: s.scope })),
  };
}

export default function Home({ loaderData }: Route.ComponentProps) {
  if (!loaderData.signedIn) {
    const href = loaderData.redirectTo === "/" ? "/auth/login" : `/auth/login?redirectTo=${encodeURIComponent(loaderData.redirectTo)}`;
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
  const { name, role, organisation, contractor, sites } = loaderData;
  return (
    <div className="space-y-6">
      <PageHeader
        title={`Good to see you, ${name.split(" ")[0]}`}
        question={
          contractor
            ? "Where your company may work today, and what it may record there."
            : "Your organisation’s plants at a glance."
        }
      >
        <p className="mt-1 text-xs text-ink-faint">
          {roleLabels[role]} · {organisation}
        </p>
      </PageHeader>
      {sites.length === 0 ? (
        <EmptyState title={contractor ? "No contract in force covers any site" : "No sites yet"}>
          {contractor
            ? "An owner’s administrator adds a contract for the sites and work your company does; it appears here from its first day."
            : "Add your plants under Sites to start receiving contractor data."}
        </EmptyState>
      ) : (
        <div className="grid gap-4 sm:grid-cols-2 lg:grid-cols-3">
          {sites.map((s) => (
            <Card key={s.id} title={`${s.name}`}>
              <p className="text-sm text-ink-soft">
                {s.code}
                {contractor ? ` · for ${s.owner}` : ""}
              </p>
              {contractor ? (
                <p className="mt-2 text-sm">
                  You may record: {s.scope.map((x) => scopeLabels[x as ScopeOfWork]).join(", ")}
                </p>
              ) : null}
              <p className="mt-3 text-sm">
                <Link to="/sites">All sites</Link>
              </p>
            </Card>
          ))}
        </div>
      )}
    </div>
  );
}

export const meta: Route.MetaFunction = () => [{ title: "Today · Wallcast" }];
