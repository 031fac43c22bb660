import { data } from "react-router";
import { SignInProblem } from "~/components/sign-in-problem";
import { authenticate, IdentityProviderUnavailable, returnToCookie } from "~/services/auth.server";
import { TooManyRequests } from "~/services/outcome";
import { clientIpOf, consumeLimit, emailKey } from "~/services/rate-limit.server";
import { headersOf } from "~/services/respond.server";
import { safeRedirect } from "~/services/safe-redirect";
import type { Route } from "./+types/auth.login";

// GET /auth/login[?login_hint=<email>][&redirectTo=/path] → the identity provider.
// Over a rate limit (per address, and per login_hint) it answers 429 with a page.
export async function loader({ request, context }: Route.LoaderArgs) {
  const url = new URL(request.url);
  const redirectTo = safeRedirect(url.searchParams.get("redirectTo"), "/");
  // Only the hint passes through: a stray state/code must not turn this into a callback.
  const clean = new URL("/auth/login", url);
  const hint = url.searchParams.get("login_hint");
  if (hint) clean.searchParams.set("login_hint", hint);
  try {
    await consumeLimit("signInStartPerIp", clientIpOf(context));
    if (hint) await consumeLimit("signInStartPerEmail", emailKey(hint));
    await authenticate(new Request(clean, { headers: request.headers }));
  } catch (thrown) {
    if (thrown instanceof Response && thrown.status >= 300 && thrown.status < 400) {
      const headers = new Headers(thrown.headers);
      headers.append("Set-Cookie", await returnToCookie().serialize(redirectTo));
      return new Response(null, { status: thrown.status, headers });
    }
    if (thrown instanceof TooManyRequests)
      return data(
        { problem: thrown.message },
        { status: 429, headers: { ...headersOf(thrown), "Cache-Control": "no-store" } },
      );
    if (thrown instanceof IdentityProviderUnavailable) {
      throw data(
        "The sign-in service is not reachable right now. Try again in a minute; if it persists, tell your administrator.",
        {
          status: 503,
        },
      );
    }
    throw thrown;
  }
  throw data("The sign-in could not start.", { status: 500 });
}

export default function SignInNotStarted({ loaderData }: Route.ComponentProps) {
  return <SignInProblem title="Sign-in did not start" problem={loaderData.problem} />;
}

export const meta: Route.MetaFunction = () => [{ title: "Sign-in · Wallcast" }];

export { keepRetryAfter as headers } from "~/services/retry-after";
