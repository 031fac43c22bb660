import { data, redirect, type RouterContextProvider } from "react-router";
import { userContext, type SessionUser } from "../context";
import { isUuid } from "./ids";
import { can, type Capability } from "./permissions";

type Args = { request: Request; context: Readonly<RouterContextProvider> };

/** The signed-in user, or a redirect to sign in (coming back here afterwards). */
export function requireUser({ request, context }: Args): SessionUser {
  const user = context.get(userContext);
  if (!user) {
    const url = new URL(request.url);
    throw redirect(`/?signin=required&redirectTo=${encodeURIComponent(url.pathname + url.search)}`);
  }
  return user;
}

export function requireCapability(args: Args, capability: Capability): SessionUser {
  const user = requireUser(args);
  if (!can(user, capability)) throw data("Your role does not allow this.", { status: 403 });
  return user;
}

/** For owner-side screens: the user's own organisation is the tenant. */
export function requireOwnerUser(
  args: Args,
  capability: Capability = "readOwnerData",
): SessionUser & { ownerId: string } {
  const user = requireCapability(args, capability);
  if (user.organisation.kind !== "owner") throw data("This page is for the owner's staff.", { status: 403 });
  return { ...user, ownerId: user.organisation.id };
}

export function notFound(
  message = "There is nothing at this address, or it is not shared with your organisation.",
): never {
  throw data(message, { status: 404 });
}

/** Malformed ids are a 404, never a database error. */
export function requireUuid(value: string | undefined): string {
  if (!isUuid(value)) notFound();
  return value.toLowerCase();
}
export { isUuid };
