import { data, redirect } from "react-router";
import { SignInProblem } from "~/components/sign-in-problem";
import { createSession } from "~/models/sessions.server";
import { decideSignIn } from "~/models/sign-in.server";
import {
  authenticate,
  clearOidcStateCookies,
  IdentityProviderUnavailable,
  returnToCookie,
} from "~/services/auth.server";
import { db } from "~/services/db.server";
import { TooManyRequests } from "~/services/outcome";
import { requestIdOf } from "~/services/problem.server";
import { clientIpOf, consumeLimit, emailKey } from "~/services/rate-limit.server";
import { headersOf } from "~/services/respond.server";
import { safeRedirect } from "~/services/safe-redirect";
import type { Route } from "./+types/auth.callback";

// The identity provider sends the browser back here with ?code&state. The state
// cookie this sign-in used is cleared whatever the outcome.
export async function loader({ request, context }: Route.LoaderArgs) {
  const headers = new Headers();
  for (const line of clearOidcStateCookies(request)) headers.append("Set-Cookie", line);
  let identity;
  try {
    await consumeLimit("signInCallbackPerIp", clientIpOf(context));
    identity = await authenticate(request);
    await consumeLimit("signInCallbackPerEmail", emailKey(identity.email));
  } catch (error) {
    if (error instanceof Response) throw error;
    if (error instanceof TooManyRequests) {
      for (const [k, v] of Object.entries(headersOf(error))) headers.set(k, v);
      return data({ problem: error.message }, { status: 429, headers });
    }
    const unavailable = error instanceof IdentityProviderUnavailable;
    return data(
      {
        problem: unavailable
          ? "The sign-in service is not reachable right now. Try again in a minute."
          : "The sign-in could not be completed: the answer from the identity provider was missing, expired, already used or not for Wallcast. Start again from the sign-in button.",
      },
      { status: unavailable ? 503 : 400, headers },
    );
  }
  const decision = await decideSignIn(db(), identity, requestIdOf(context));
  headers.append("Set-Cookie", await returnToCookie().serialize("", { maxAge: 0 }));
  if (!decision.admitted) return redirect(`/auth/no-access?reason=${decision.reason}`, { headers });
  const returnTo = safeRedirect(await returnToCookie().parse(request.headers.get("Cookie")), "/");
  headers.append("Set-Cookie", await createSession(db(), decision.userId, request.headers.get("User-Agent")));
  return redirect(returnTo, { headers });
}

export default function SignInFailed({ loaderData }: Route.ComponentProps) {
  return <SignInProblem title="Sign-in did not complete" problem={loaderData.problem} />;
}

export const meta: Route.MetaFunction = () => [{ title: "Sign-in · Wallcast" }];

export { keepRetryAfter as headers } from "~/services/retry-after";
