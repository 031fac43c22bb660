import "@fontsource/work-sans/400.css";
import "@fontsource/work-sans/500.css";
import "@fontsource/work-sans/600.css";
import "./app.css";

import { QueryClient, QueryClientProvider } from "@tanstack/react-query";
import { useState, type ReactNode } from "react";
import {
  data,
  Form,
  isRouteErrorResponse,
  Links,
  Meta,
  NavLink,
  Outlet,
  Scripts,
  ScrollRestoration,
  useLoaderData,
  useLocation,
  useRouteLoaderData,
  type ShouldRevalidateFunction,
} from "react-router";
import type { Route } from "./+types/root";
import { FormAlert } from "./components/field";
import { requestInfoContext, userContext, type BearerAuth } from "./context";
import { lookUpApiToken } from "./models/api-clients.server";
import { readSession } from "./models/sessions.server";
import { hasThicknessScope } from "./models/thickness-surveys.server";
import { db } from "./services/db.server";
import { takeFlash } from "./services/flash.server";
import {
  bearerLoader,
  bodyRefusalGuard,
  crossSiteGuard,
  databaseOutage,
  sessionLoader,
} from "./services/middleware.server";
import { navigationFor, type NavItem } from "./services/navigation";
import { roleLabels } from "./services/permissions";

export const middleware: Route.MiddlewareFunction[] = [
  databaseOutage,
  bodyRefusalGuard,
  crossSiteGuard,
  bearerLoader(async (token): Promise<BearerAuth> => {
    const found = await lookUpApiToken(db(), token);
    if ("refused" in found) return { kind: "refused", reason: found.refused };
    const c = found.client;
    return {
      kind: "bearer",
      client: {
        clientId: c.id,
        clientName: c.name,
        scopes: c.scopes,
        requestsPerMinute: c.requests_per_minute,
        organisation: { id: c.owner_id, name: c.owner_name, kind: "owner" },
      },
    };
  }),
  sessionLoader((request) => readSession(db(), request)),
];

export const links: Route.LinksFunction = () => [{ rel: "icon", href: "/favicon.svg", type: "image/svg+xml" }];

export async function loader({ request, context }: Route.LoaderArgs) {
  const user = context.get(userContext);
  const { flash, setCookie } = await takeFlash(request);
  return data(
    {
      nonce: context.get(requestInfoContext).nonce,
      user: user
        ? { name: user.name, email: user.email, role: user.role, units: user.units, organisation: user.organisation }
        : null,
      nav: navigationFor(user, {
        thicknessInspection: user ? await hasThicknessScope(db(), user) : false,
      }),
      flash,
    },
    setCookie ? { headers: { "Set-Cookie": setCookie } } : undefined,
  );
}

/**
 * After any form post — including one that failed validation (4xx), which React Router
 * would not revalidate by default — reload the root data, so a flash message from an
 * earlier page ("Contract saved") does not linger beside a new error.
 */
export const shouldRevalidate: ShouldRevalidateFunction = ({ formMethod, defaultShouldRevalidate }) =>
  formMethod !== undefined && formMethod !== "GET" ? true : defaultShouldRevalidate;

export function Layout({ children }: { children: ReactNode }) {
  const data = useRouteLoaderData<typeof loader>("root");
  const nonce = data?.nonce;
  return (
    <html lang="en">
      <head>
        <meta charSet="utf-8" />
        <meta name="viewport" content="width=device-width, initial-scale=1" />
        <Meta />
        <Links />
      </head>
      <body className="min-h-screen bg-paper text-ink antialiased">
        {children}
        <ScrollRestoration nonce={nonce} />
        <Scripts nonce={nonce} />
      </body>
    </html>
  );
}

export default function App() {
  const [queryClient] = useState(() => new QueryClient({ defaultOptions: { queries: { staleTime: 10_000 } } }));
  return (
    <QueryClientProvider client={queryClient}>
      <Shell>
        <Outlet />
      </Shell>
    </QueryClientProvider>
  );
}

type ShellUser = NonNullable<ReturnType<typeof useLoaderData<typeof loader>>["user"]>;

function MainNav({ items, stacked = false }: { items: NavItem[]; stacked?: boolean }) {
  if (items.length === 0) return null;
  return (
    <nav aria-label="Main" className={stacked ? "grid gap-1 text-sm sm:grid-cols-2" : "flex flex-wrap gap-1 text-sm"}>
      {items.map((item) => (
        <NavLink
          key={item.to}
          to={item.to}
          end={item.to === "/"}
          className={({ isActive }) =>
            `rounded-md px-2.5 py-1.5 no-underline ${stacked ? "flex min-h-11 items-center" : "touch:inline-flex touch:min-h-11 touch:items-center"} ${isActive ? "bg-tide-50 font-medium text-tide-900" : "text-ink-soft hover:text-ink"}`
          }
        >
          {item.label}
        </NavLink>
      ))}
    </nav>
  );
}

/** Who is signed in, linking to the profile (name, role, organisation, display units). */
function Who({ user }: { user: ShellUser }) {
  return (
    <a
      href="/profile"
      className="block leading-tight no-underline lg:text-right"
      title="Your profile and display units"
    >
      <span className="block font-medium text-ink">{user.name || user.email}</span>
      <span className="block text-xs text-ink-soft">
        {roleLabels[user.role]} · {user.organisation.name} · {user.units === "si" ? "SI units" : "US units"}
      </span>
    </a>
  );
}

function SignOut() {
  return (
    <Form method="post" action="/auth/logout">
      <button type="submit" className="rounded-md border border-rule px-2.5 py-1.5 text-ink-soft hover:text-ink">
        Sign out
      </button>
    </Form>
  );
}

function MenuIcon() {
  return (
    <svg aria-hidden="true" viewBox="0 0 20 20" className="size-5" fill="none" stroke="currentColor" strokeWidth="1.75">
      <path d="M3 5.5h14M3 10h14M3 14.5h14" strokeLinecap="round" />
    </svg>
  );
}

function Shell({ children }: { children: ReactNode }) {
  const { user, nav, flash } = useLoaderData<typeof loader>();
  const location = useLocation();
  return (
    <div className="flex min-h-screen flex-col">
      <a
        href="#main"
        className="sr-only focus:not-sr-only focus:absolute focus:left-2 focus:top-2 focus:rounded focus:bg-panel focus:px-3 focus:py-1"
      >
        Skip to content
      </a>
      <header className="no-print relative border-b border-rule bg-panel">
        <div className="mx-auto flex max-w-7xl items-center gap-6 px-4 py-2.5">
          <a href="/" className="flex min-h-11 items-center gap-2 font-semibold text-ink no-underline lg:min-h-0">
            <img src="/favicon.svg" alt="" className="size-6" />
            Wallcast
          </a>
          {user ? (
            <>
              {/* from 1024 px: the navigation in a row, who is signed in at the right */}
              <div className="hidden flex-1 items-center gap-6 lg:flex">
                <MainNav items={nav} />
                <div className="ml-auto flex items-center gap-3 text-sm">
                  <Who user={user} />
                  <SignOut />
                </div>
              </div>
              {/* narrower: one "Menu" disclosure (works without JavaScript), closed again on every navigation */}
              <details key={location.pathname} className="group ml-auto lg:hidden">
                <summary className="flex min-h-11 cursor-pointer list-none items-center gap-2 rounded-md border border-rule px-3 text-sm font-medium text-ink hover:bg-tide-50 [&::-webkit-details-marker]:hidden">
                  <MenuIcon />
                  Menu
                </summary>
                <div className="absolute inset-x-0 top-full z-20 border-b border-rule bg-panel shadow-lg">
                  <div className="mx-auto max-w-7xl space-y-3 px-4 py-3">
                    <div className="border-b border-rule pb-3 text-sm">
                      <Who user={user} />
                    </div>
                    <MainNav items={nav} stacked />
                    <SignOut />
                  </div>
                </div>
              </details>
            </>
          ) : (
            <div className="ml-auto text-sm">
              <a
                href="/auth/login"
                className="inline-flex min-h-11 items-center rounded-md bg-tide-700 px-3 py-1.5 font-medium text-white no-underline hover:bg-tide-900 lg:min-h-0"
              >
                Sign in
              </a>
            </div>
          )}
        </div>
      </header>
      <main id="main" className="mx-auto w-full max-w-7xl flex-1 px-4 py-6">
        {flash ? (
          <div className="mb-4">
            <FormAlert tone={flash.tone}>{flash.message}</FormAlert>
          </div>
        ) : null}
        {children}
      </main>
      <footer className="no-print border-t border-rule py-3 text-center text-xs text-ink-faint">
        Wallcast · a site&rsquo;s records are shown in its time zone, organisation-wide pages in the zone of your
        profile · corrosion rates use an 8760-hour year
      </footer>
    </div>
  );
}

export function ErrorBoundary({ error }: Route.ErrorBoundaryProps) {
  let title = "Something went wrong";
  let detail =
    "The page could not be shown. Try again; if it keeps happening, tell your administrator the time it happened.";
  if (isRouteErrorResponse(error)) {
    if (error.status === 404) {
      title = "Not found";
      detail = "There is nothing at this address, or it is not shared with your organisation.";
    } else if (error.status === 413) {
      title = "Too much was sent";
      if (typeof error.data === "string" && error.data) detail = error.data;
    } else if (error.status === 403) {
      title = "Not allowed";
      detail = typeof error.data === "string" && error.data ? error.data : "Your role does not allow this action.";
    } else {
      title = `${error.status} ${error.statusText}`;
      if (typeof error.data === "string" && error.data) detail = error.data;
    }
  }
  return (
    <main id="main" className="mx-auto max-w-2xl px-4 py-16">
      <h1 className="text-2xl font-semibold">{title}</h1>
      <p className="mt-2 text-ink-soft">{detail}</p>
      <p className="mt-6">
        <a href="/">Go to the start page</a>
      </p>
    </main>
  );
}
