import type { Role, Units } from "../context";
import type { Db } from "../services/db.server";

export type MemberRow = {
  id: string;
  organisation_id: string;
  organisation_name: string;
  organisation_kind: "owner" | "contractor";
  email: string;
  name: string;
  role: Role;
  status: "invited" | "active" | "disabled";
  units: Units;
  last_sign_in_at: Date | null;
  created_at: Date;
};

const memberColumns = [
  "u.id",
  "u.organisation_id",
  "o.name as organisation_name",
  "o.kind as organisation_kind",
  "u.email",
  "u.name",
  "u.role",
  "u.status",
  "u.units",
  "u.last_sign_in_at",
  "u.created_at",
];

export async function findUserByEmail(conn: Db, email: string) {
  return conn("users as u")
    .join("organisations as o", "o.id", "u.organisation_id")
    .where("u.email", email.trim().toLowerCase())
    .first<MemberRow & { idp_subject: string | null }>([...memberColumns, "u.idp_subject"]);
}

/**
 * People an owner's administrator manages: the owner's own staff, and technicians of
 * contractors the owner has engaged whom this owner invited.
 */
export async function listMembers(conn: Db, ownerId: string): Promise<MemberRow[]> {
  return conn("users as u")
    .join("organisations as o", "o.id", "u.organisation_id")
    .where((q) => q.where("u.organisation_id", ownerId).orWhere("u.invited_by_organisation_id", ownerId))
    .orderBy([{ column: "o.kind", order: "desc" }, "o.name", "u.email"])
    .select(memberColumns);
}

export async function getManagedMember(conn: Db, ownerId: string, userId: string): Promise<MemberRow | undefined> {
  return conn("users as u")
    .join("organisations as o", "o.id", "u.organisation_id")
    .where("u.id", userId)
    .where((q) => q.where("u.organisation_id", ownerId).orWhere("u.invited_by_organisation_id", ownerId))
    .first(memberColumns);
}

/** Contractors this owner has engaged (any contract, past or present). */
export async function engagedContractors(conn: Db, ownerId: string): Promise<Array<{ id: string; name: string }>> {
  return conn("organisations as o")
    .whereIn("o.id", conn("contracts").where({ owner_id: ownerId }).select("contractor_id"))
    .orderBy("o.name")
    .select("o.id", "o.name");
}
