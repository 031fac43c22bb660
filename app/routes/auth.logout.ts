import { redirect } from "react-router";
import { destroySession } from "~/models/sessions.server";
import { endSessionUrl } from "~/services/auth.server";
import { db } from "~/services/db.server";
import { redirectWithFlash } from "~/services/flash.server";
import type { Route } from "./+types/auth.logout";

// Sign-out is a POST (a link cannot sign anyone out); it deletes the session row and,
// when the provider advertises an end_session_endpoint, sends the browser there to end
// the provider's session too, which sends it back to the start page.
export async function action({ request }: Route.ActionArgs) {
  const clear = await destroySession(db(), request);
  const target = (await endSessionUrl()) ?? "/";
  return redirectWithFlash(
    target,
    { tone: "ok", message: "You are signed out." },
    { headers: { "Set-Cookie": clear } },
  );
}

export function loader() {
  return redirect("/");
}
