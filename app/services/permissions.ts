import type { Role, SessionUser } from "../context";

/**
 * Who may do what. Pure (shared by the navigation and the server-side checks);
 * the server enforces every one of these in loaders and actions.
 */
export const ownerRoles: readonly Role[] = ["administrator", "integrity_engineer", "plant_manager"];

export const roleLabels: Record<Role, string> = {
  administrator: "Administrator",
  integrity_engineer: "Integrity engineer",
  plant_manager: "Plant manager",
  contractor_technician: "Contractor technician",
};

export type Capability =
  | "readOwnerData"
  | "setUpSites"
  | "decideSubmissions"
  | "manageMembers"
  | "manageContracts"
  | "viewContracts"
  | "manageApiClients"
  | "readAudit"
  | "recordWork"
  | "recomputeLife";

const grants: Record<Capability, readonly Role[]> = {
  readOwnerData: ["administrator", "integrity_engineer", "plant_manager"],
  setUpSites: ["administrator", "integrity_engineer"],
  decideSubmissions: ["integrity_engineer"],
  manageMembers: ["administrator"],
  manageContracts: ["administrator"],
  viewContracts: ["administrator", "integrity_engineer"],
  manageApiClients: ["administrator"],
  readAudit: ["administrator", "integrity_engineer"],
  recordWork: ["contractor_technician"],
  /** Queue a recompute of every circuit's remaining life (an engineering decision). */
  recomputeLife: ["integrity_engineer"],
};

export function can(user: Pick<SessionUser, "role"> | null | undefined, capability: Capability): boolean {
  return Boolean(user && grants[capability].includes(user.role));
}

export const scopeLabels = {
  coupon_monitoring: "Coupon monitoring",
  thickness_inspection: "Thickness inspection",
} as const;
export type ScopeOfWork = keyof typeof scopeLabels;
