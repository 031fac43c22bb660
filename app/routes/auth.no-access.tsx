import { data } from "react-router";
import { Card, PageHeader } from "~/components/layout";
import type { Route } from "./+types/auth.no-access";

const reasons = {
  unknown: {
    title: "You have no access to Wallcast yet",
    text: "Your identity provider signed you in, but this e-mail address has not been invited to Wallcast. Ask your organisation’s Wallcast administrator to invite you, then sign in again.",
  },
  unverified: {
    title: "Your e-mail address is not verified",
    text: "Your identity provider says this e-mail address has not been verified, so Wallcast cannot tell that it is yours. Verify it with your identity provider (or ask its administrator), then sign in again.",
  },
  identity: {
    title: "This address is bound to another sign-in account",
    text: "Your identity provider signed you in with an account other than the one this e-mail address first signed in to Wallcast with, so Wallcast did not let you in: it could be someone else using your address. If your account at the identity provider really changed, ask your organisation’s Wallcast administrator to reset your sign-in identity on the people page, then sign in again. Your administrator can see this refused sign-in on the audit trail.",
  },
  disabled: {
    title: "Your access has been turned off",
    text: "An administrator of your organisation has disabled your Wallcast account. If you think this is a mistake, ask them to turn it back on.",
  },
} as const;

export function loader({ request }: Route.LoaderArgs) {
  const reason = new URL(request.url).searchParams.get("reason");
  const key = reason && reason in reasons ? (reason as keyof typeof reasons) : "unknown";
  return data({ reason: key }, { status: 403, headers: { "Cache-Control": "no-store" } });
}

export default function NoAccess({ loaderData }: Route.ComponentProps) {
  const r = reasons[loaderData.reason];
  return (
    <div className="mx-auto max-w-xl">
      <PageHeader title={r.title} />
      <Card>
        <p className="text-sm text-ink-soft">{r.text}</p>
        <p className="mt-2 text-sm text-ink-soft">No Wallcast session was created.</p>
        <p className="mt-4">
          <a href="/auth/login">Sign in with another account</a>
        </p>
      </Card>
    </div>
  );
}

export const meta: Route.MetaFunction = () => [{ title: "No access · Wallcast" }];
