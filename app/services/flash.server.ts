import { createCookie, redirect } from "react-router";
import { env } from "./env.server";

/** A one-time message shown on the next page ("Contract saved."), carried in a cookie. */
let cookie: ReturnType<typeof createCookie> | undefined;
function flashCookie() {
  cookie ??= createCookie("wallcast_flash", {
    httpOnly: true,
    sameSite: "lax",
    path: "/",
    maxAge: 60,
    secure: env().APP_ORIGIN.startsWith("https://"),
    secrets: env().SESSION_SECRETS,
  });
  return cookie;
}

export type Flash = { tone: "ok" | "warn" | "bad"; message: string };

export async function redirectWithFlash(to: string, flash: Flash, init: ResponseInit = {}): Promise<Response> {
  const headers = new Headers(init.headers);
  headers.append("Set-Cookie", await flashCookie().serialize(flash));
  return redirect(to, { ...init, headers });
}

export async function takeFlash(request: Request): Promise<{ flash: Flash | null; setCookie: string | null }> {
  const value = (await flashCookie().parse(request.headers.get("Cookie"))) as Flash | null;
  if (!value || typeof value.message !== "string") return { flash: null, setCookie: null };
  return { flash: value, setCookie: await flashCookie().serialize("", { maxAge: 0 }) };
}
