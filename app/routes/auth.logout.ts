import { redirect } from "react-router";
import { destroySession } from "~/models/sessions.server";
import { db } from "~/services/db.server";
import { redirectWithFlash } from "~/services/flash.server";
import type { Route } from "./+types/auth.logout";

// Sign-out is a POST (a link cannot sign anyone out); it deletes the session row.
export async function action({ request }: Route.ActionArgs) {
  const clear = await destroySession(db(), request);
  return redirectWithFlash("/", { tone: "ok", message: "You are signed out." }, { headers: { "Set-Cookie": clear } });
}

export function loader() {
  return redirect("/");
}
