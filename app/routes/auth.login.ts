import { data } from "react-router";
import { authenticate, IdentityProviderUnavailable, returnToCookie } from "~/services/auth.server";
import { safeRedirect } from "~/services/safe-redirect";
import type { Route } from "./+types/auth.login";

// GET /auth/login[?login_hint=<email>][&redirectTo=/path] → the identity provider.
export async function loader({ request }: Route.LoaderArgs) {
  const url = new URL(request.url);
  const redirectTo = safeRedirect(url.searchParams.get("redirectTo"), "/");
  // Only the hint passes through: a stray state/code must not turn this into a callback.
  const clean = new URL("/auth/login", url);
  const hint = url.searchParams.get("login_hint");
  if (hint) clean.searchParams.set("login_hint", hint);
  try {
    await authenticate(new Request(clean, { headers: request.headers }));
  } catch (thrown) {
    if (thrown instanceof Response && thrown.status >= 300 && thrown.status < 400) {
      const headers = new Headers(thrown.headers);
      headers.append("Set-Cookie", await returnToCookie().serialize(redirectTo));
      return new Response(null, { status: thrown.status, headers });
    }
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
