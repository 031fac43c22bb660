import { z } from "zod";
import type { Role, SessionUser, Units } from "../context";
import type { Db } from "../services/db.server";
import { isUuid } from "../services/guards.server";
import { ownerRoles } from "../services/permissions";
import { destroyUserSessions } from "../services/session.server";
import { actorOf, recordAudit } from "./audit.server";

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

// ── Administration of members (invite, change role, disable / re-enable) ──────────

/** Field name → message in words, for the form that sent the input. */
type FieldErrors = Record<string, string>;
/** 400: the input needs correcting; 404: the person is not one this owner manages. */
export type MemberOutcome<T> = ({ ok: true } & T) | { ok: false; status: 400 | 404; errors: FieldErrors };
export type InviteOutcome = MemberOutcome<{ userId: string }>;
export type RoleChangeOutcome = MemberOutcome<{ changed: boolean; member: MemberRow }>;
export type AccessOutcome = MemberOutcome<{ changed: boolean; member: MemberRow; sessionsEnded: number }>;

const fieldErrorsOf = (error: z.ZodError): FieldErrors =>
  Object.fromEntries(Object.entries(z.flattenError(error).fieldErrors).map(([k, v]) => [k, (v as string[])[0]]));

const isUniqueViolation = (error: unknown, constraint: string) =>
  (error as { code?: string; constraint?: string }).code === "23505" &&
  (error as { constraint?: string }).constraint === constraint;

const allRoles = ["administrator", "integrity_engineer", "plant_manager", "contractor_technician"];

export const inviteMemberSchema = z.object({
  email: z
    .string({ error: "Type the person’s e-mail address." })
    .trim()
    .toLowerCase()
    .min(1, "Type the person’s e-mail address.")
    .max(254, "An e-mail address has at most 254 characters.")
    .regex(/^[^@\s]+@[^@\s]+\.[^@\s]+$/, "That is not an e-mail address; it looks like name@company.com."),
  name: z
    .string({ error: "Type the person’s name." })
    .trim()
    .min(1, "Type the person’s name.")
    .max(120, "Keep the name under 120 characters."),
  role: z.enum(allRoles, { error: "Choose what this person does." }),
  /** For a contractor technician: the contractor (engaged by this owner) they work for. */
  contractorId: z.string().optional(),
});

export const changeRoleSchema = z.object({
  userId: z.string().refine(isUuid, "Choose a person from the list."),
  role: z.enum(ownerRoles as [Role, ...Role[]], {
    error: "Choose an owner role: administrator, integrity engineer or plant manager.",
  }),
});

function duplicateAddress(email: string, ours: boolean): FieldErrors {
  return {
    email: ours
      ? `${email} is already on your list of people.`
      : `${email} already belongs to another organisation in Wallcast. An address can belong to one organisation only; ask the person which address they use for your work.`,
  };
}

/**
 * Invites a person by e-mail: one of the owner's own staff (an owner role), or a
 * technician of a contractor this owner has engaged. The address must be new to
 * Wallcast. The person can sign in from now on; their first sign-in activates them.
 */
export async function inviteMember(
  conn: Db,
  admin: SessionUser,
  input: unknown,
  requestId?: string | null,
): Promise<InviteOutcome> {
  const parsed = inviteMemberSchema.safeParse(input);
  if (!parsed.success) return { ok: false, status: 400, errors: fieldErrorsOf(parsed.error) };
  const v = parsed.data;
  const ownerId = admin.organisation.id;

  let organisationId = ownerId;
  let organisationName = admin.organisation.name;
  if (v.role === "contractor_technician") {
    if (!v.contractorId || !isUuid(v.contractorId))
      return { ok: false, status: 400, errors: { contractorId: "Choose the contractor this technician works for." } };
    const wanted = v.contractorId.toLowerCase();
    const engaged = (await engagedContractors(conn, ownerId)).find((c) => c.id === wanted);
    if (!engaged)
      return {
        ok: false,
        status: 400,
        errors: { contractorId: "That company is not one of your contractors. Add a contract with it first." },
      };
    organisationId = engaged.id;
    organisationName = engaged.name;
  }

  try {
    return await conn.transaction(async (trx): Promise<InviteOutcome> => {
      const existing = await trx("users")
        .where({ email: v.email })
        .first<{ organisation_id: string; invited_by_organisation_id: string | null } | undefined>(
          "organisation_id",
          "invited_by_organisation_id",
        );
      if (existing) {
        const ours = existing.organisation_id === ownerId || existing.invited_by_organisation_id === ownerId;
        return { ok: false, status: 400, errors: duplicateAddress(v.email, ours) };
      }
      const [row] = await trx("users")
        .insert({
          organisation_id: organisationId,
          email: v.email,
          name: v.name,
          role: v.role,
          status: "invited",
          invited_by_organisation_id: v.role === "contractor_technician" ? ownerId : null,
          invited_by_user_id: admin.id,
        })
        .returning<Array<{ id: string }>>(["id"]);
      await recordAudit(trx, {
        ownerId,
        actor: actorOf(admin),
        action: "member.invited",
        recordType: "user",
        recordId: row.id,
        after: { email: v.email, name: v.name, role: v.role, organisation: organisationName, status: "invited" },
        requestId,
      });
      return { ok: true, userId: row.id };
    });
  } catch (error) {
    // Two administrators inviting the same address at the same moment.
    if (isUniqueViolation(error, "users_email_key"))
      return { ok: false, status: 400, errors: duplicateAddress(v.email, false) };
    throw error;
  }
}

/** Gives one of the owner's own staff another owner role. An administrator cannot change their own. */
export async function changeMemberRole(
  conn: Db,
  admin: SessionUser,
  input: unknown,
  requestId?: string | null,
): Promise<RoleChangeOutcome> {
  const parsed = changeRoleSchema.safeParse(input);
  if (!parsed.success) {
    const errors = fieldErrorsOf(parsed.error);
    return { ok: false, status: errors.userId ? 404 : 400, errors };
  }
  const { userId, role } = parsed.data;
  const ownerId = admin.organisation.id;
  return conn.transaction(async (trx): Promise<RoleChangeOutcome> => {
    const member = await getManagedMember(trx, ownerId, userId.toLowerCase());
    if (!member) return { ok: false, status: 404, errors: { userId: "That person is not one of yours." } };
    if (member.organisation_id !== ownerId)
      return {
        ok: false,
        status: 400,
        errors: {
          role: `${member.email} works for ${member.organisation_name}; a contractor technician’s role cannot change.`,
        },
      };
    if (member.id === admin.id)
      return {
        ok: false,
        status: 400,
        errors: { role: "You cannot change your own role. Ask another administrator." },
      };
    if (member.role === role) return { ok: true, changed: false, member };
    await trx("users").where({ id: member.id, organisation_id: ownerId }).update({ role, updated_at: trx.fn.now() });
    await recordAudit(trx, {
      ownerId,
      actor: actorOf(admin),
      action: "member.role_changed",
      recordType: "user",
      recordId: member.id,
      before: { email: member.email, role: member.role },
      after: { email: member.email, role },
      requestId,
    });
    return { ok: true, changed: true, member: { ...member, role } };
  });
}

/**
 * Turns a person's access off (their open sessions end at once, so a signed-in
 * browser stops working on its next request) or back on. An administrator cannot
 * disable themself. Re-enabled people who never signed in return to "invited".
 */
export async function setMemberAccess(
  conn: Db,
  admin: SessionUser,
  input: { userId: string; access: "disabled" | "enabled" },
  requestId?: string | null,
): Promise<AccessOutcome> {
  if (!isUuid(input.userId)) return { ok: false, status: 404, errors: { userId: "That person is not one of yours." } };
  const ownerId = admin.organisation.id;
  return conn.transaction(async (trx): Promise<AccessOutcome> => {
    const member = await getManagedMember(trx, ownerId, input.userId.toLowerCase());
    if (!member) return { ok: false, status: 404, errors: { userId: "That person is not one of yours." } };
    if (member.id === admin.id)
      return { ok: false, status: 400, errors: { userId: "You cannot disable yourself. Ask another administrator." } };
    const status = input.access === "disabled" ? "disabled" : member.last_sign_in_at ? "active" : "invited";
    if (member.status === status || (input.access === "enabled" && member.status !== "disabled"))
      return { ok: true, changed: false, member, sessionsEnded: 0 };
    await trx("users").where({ id: member.id }).update({ status, updated_at: trx.fn.now() });
    let sessionsEnded = 0;
    if (status === "disabled") {
      const [{ count }] = await trx("sessions")
        .where({ user_id: member.id })
        .count<Array<{ count: string }>>({ count: "*" });
      sessionsEnded = Number(count);
      await destroyUserSessions(member.id, trx);
    }
    await recordAudit(trx, {
      ownerId,
      actor: actorOf(admin),
      action: status === "disabled" ? "member.disabled" : "member.enabled",
      recordType: "user",
      recordId: member.id,
      before: { email: member.email, status: member.status },
      after: { email: member.email, status, ...(status === "disabled" ? { sessions_ended: sessionsEnded } : {}) },
      requestId,
    });
    return { ok: true, changed: true, member: { ...member, status }, sessionsEnded };
  });
}

// ── One's own profile ──────────────────────────────────────────────────────────────

/** The units a person reads numbers in (display only: values stay stored in SI). */
export async function setOwnUnits(conn: Db, userId: string, organisationId: string, units: Units): Promise<void> {
  await conn("users")
    .where({ id: userId, organisation_id: organisationId })
    .update({ units, updated_at: conn.fn.now() });
}
