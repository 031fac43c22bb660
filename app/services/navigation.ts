import type { SessionUser } from "../context";
import { can } from "./permissions";

export type NavItem = { to: string; label: string };

/**
 * The navigation shows only what the role can do; a technician whose company has a
 * thickness-inspection contract in force also gets the thickness surveys.
 */
export function navigationFor(user: SessionUser | null, work: { thicknessInspection?: boolean } = {}): NavItem[] {
  if (!user) return [];
  const items: NavItem[] = [{ to: "/", label: "Today" }];
  items.push({ to: "/sites", label: user.organisation.kind === "owner" ? "Sites" : "My sites" });
  items.push({ to: "/pulls", label: "Pull schedule" });
  if (can(user, "recordWork")) {
    if (work.thicknessInspection) items.push({ to: "/surveys", label: "Thickness surveys" });
    items.push({ to: "/submissions", label: "Submissions" });
  } else {
    items.push({ to: "/review", label: can(user, "decideSubmissions") ? "Review queue" : "Submissions" });
  }
  if (can(user, "setUpSites")) items.push({ to: "/setup", label: "Set-up" });
  if (can(user, "manageMembers")) items.push({ to: "/admin/members", label: "People" });
  if (can(user, "viewContracts")) items.push({ to: "/contracts", label: "Contracts" });
  if (can(user, "manageApiClients")) items.push({ to: "/admin/api-clients", label: "API clients" });
  if (can(user, "readAudit")) items.push({ to: "/audit", label: "Audit trail" });
  return items;
}
