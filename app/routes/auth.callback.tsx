import { data, redirect } from "react-router";
import { Card, PageHeader } from "~/components/layout";
import { createSession } from "~/models/sessions.server";
import { decideSignIn } from "~/models/sign-in.server";
import {
  authenticate,
  clearOidcStateCookie,
  IdentityProviderUnavailable,
  returnToCookie,
} from "~/services/auth.server";
import { db } from "~/services/db.server";
import { safeRedirect } from "~/services/safe-redirect";
import type { Route } from "./+types/auth.callback";

// The identity provider sends the browser back here with ?code&state.
export async function loader({ request }: Route.LoaderArgs) {
  const clearState = clearOidcStateCookie();
  let identity;
  try {
    identity = await authenticate(request);
  } catch (error) {
    if (error instanceof Response) throw error;
    const unavailable = error instanceof IdentityProviderUnavailable;
    return data(
      {
        problem: unavailable
          ? "The sign-in service is not reachable right now. Try again in a minute."
          : "The sign-in could not be completed: the answer from the identity provider was missing, expired, already used or not for Wallcast. Start again from the sign-in button.",
      },
      { status: unavailable ? 503 : 400, headers: { "Set-Cookie": clearState } },
    );
  }
  const decision = await decideSignIn(db(), identity);
  const headers = new Headers({ "Set-Cookie": clearState });
  headers.append("Set-Cookie", await returnToCookie().serialize("", { maxAge: 0 }));
  if (!decision.admitted) return redirect(`/auth/no-access?reason=${decision.reason}`, { headers });
  const returnTo = safeRedirect(await returnToCookie().parse(request.headers.get("Cookie")), "/");
  headers.append("Set-Cookie", await createSession(db(), decision.userId, request.headers.get("User-Agent")));
  return redirect(returnTo, { headers });
}

export default function SignInFailed({ loaderData }: Route.ComponentProps) {
  return (
    <div className="mx-auto max-w-xl">
      <PageHeader title="Sign-in did not complete" />
      <Card>
        <p className="text-sm text-ink-soft">{loaderData.problem}</p>
        <p className="mt-4">
          <a href="/auth/login">Sign in again</a>
        </p>
      </Card>
    </div>
  );
}

export const meta: Route.MetaFunction = () => [{ title: "Sign-in · Wallcast" }];
