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
  useRouteLoaderData,
  type ShouldRevalidateFunction,
} from "react-router";
import type { Route } from "./+types/root";
import { FormAlert } from "./components/field";
import { requestInfoContext, userContext } from "./context";
import { readSession } from "./models/sessions.server";
import { db } from "./services/db.server";
import { takeFlash } from "./services/flash.server";
import { bodyRefusalGuard, crossSiteGuard, sessionLoader } from "./services/middleware.server";
import { navigationFor } from "./services/navigation";
import { roleLabels } from "./services/permissions";

export const middleware: Route.MiddlewareFunction[] = [
  bodyRefusalGuard,
  crossSiteGuard,
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
      nav: navigationFor(user),
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

function Shell({ children }: { children: ReactNode }) {
  const { user, nav, flash } = useLoaderData<typeof loader>();
  return (
    <div className="flex min-h-screen flex-col">
      <a
        href="#main"
        className="sr-only focus:not-sr-only focus:absolute focus:left-2 focus:top-2 focus:rounded focus:bg-panel focus:px-3 focus:py-1"
      >
        Skip to content
      </a>
      <header className="no-print border-b border-rule bg-panel">
        <div className="mx-auto flex max-w-7xl items-center gap-6 px-4 py-2.5">
          <a href="/" className="flex items-center gap-2 font-semibold text-ink no-underline">
            <img src="/favicon.svg" alt="" className="size-6" />
            Wallcast
          </a>
          {nav.length > 0 ? (
            <nav aria-label="Main" className="flex flex-wrap gap-1 text-sm">
              {nav.map((item) => (
                <NavLink
                  key={item.to}
                  to={item.to}
                  end={item.to === "/"}
                  className={({ isActive }) =>
                    `rounded-md px-2.5 py-1.5 no-underline ${isActive ? "bg-tide-50 font-medium text-tide-900" : "text-ink-soft hover:text-ink"}`
                  }
                >
                  {item.label}
                </NavLink>
              ))}
            </nav>
          ) : null}
          <div className="ml-auto flex items-center gap-3 text-sm">
            {user ? (
              <>
                <a
                  href="/profile"
                  className="text-right leading-tight no-underline"
                  title="Your profile and display units"
                >
                  <span className="block font-medium text-ink">{user.name || user.email}</span>
                  <span className="block text-xs text-ink-soft">
                    {roleLabels[user.role]} · {user.organisation.name} · {user.units === "si" ? "SI units" : "US units"}
                  </span>
                </a>
                <Form method="post" action="/auth/logout">
                  <button
                    type="submit"
                    className="rounded-md border border-rule px-2.5 py-1.5 text-ink-soft hover:text-ink"
                  >
                    Sign out
                  </button>
                </Form>
              </>
            ) : (
              <a
                href="/auth/login"
                className="rounded-md bg-tide-700 px-3 py-1.5 font-medium text-white no-underline hover:bg-tide-900"
              >
                Sign in
              </a>
            )}
          </div>
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
