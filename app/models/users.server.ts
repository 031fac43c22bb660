import { plainCharacters } from "../services/form-fields";
import { z } from "zod";
import type { Role, SessionUser, Units } from "../context";
import type { Db } from "../services/db.server";
import { isUuid } from "../services/ids";
import { Forbidden, Invalid, NotFoundInTenant, parseOrThrow, type FieldErrors } from "../services/outcome";
import { can, ownerRoles } from "../services/permissions";
import { destroyUserSessions } from "./sessions.server";
import { actorOf, auditedWrite } from "./audit.server";
import { enqueueNotification } from "./notifications.server";

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

/** A person as sign-in sees them: who they are, and which owner invited them (technicians). */
export type UserAccountRow = MemberRow & { idp_subject: string | null; invited_by_organisation_id: string | null };

export async function findUserByEmail(conn: Db, email: string): Promise<UserAccountRow | undefined> {
  return conn("users as u")
    .join("organisations as o", "o.id", "u.organisation_id")
    .where("u.email", email.trim().toLowerCase())
    .first<UserAccountRow | undefined>([...memberColumns, "u.idp_subject", "u.invited_by_organisation_id"]);
}

/**
 * A person on the people page: when their sign-in identity was bound, and the last
 * sign-in refused for presenting another identity since it was bound or reset.
 */
export type MemberListRow = MemberRow & { identity_bound_at: Date | null; identity_refused_at: Date | null };

/**
 * People an owner's administrator manages: the owner's own staff, and technicians of
 * contractors the owner has engaged whom this owner invited.
 */
export async function listMembers(conn: Db, ownerId: string): Promise<MemberListRow[]> {
  const refused = conn.raw(
    `(select max(e.created_at) from audit_events e
       where e.owner_id = :ownerId and e.record_type = 'user' and e.record_id = u.id::text
         and e.action = 'sign_in.refused' and e.after->>'refusal' in ('identity_mismatch', 'identity_in_use')
         and e.created_at > coalesce(
           (select max(b.created_at) from audit_events b
             where b.owner_id = :ownerId and b.record_type = 'user' and b.record_id = u.id::text
               and b.action in ('member.identity_bound', 'member.identity_reset')),
           '-infinity'::timestamptz)) as identity_refused_at`,
    { ownerId },
  );
  return conn("users as u")
    .join("organisations as o", "o.id", "u.organisation_id")
    .where((q) => q.where("u.organisation_id", ownerId).orWhere("u.invited_by_organisation_id", ownerId))
    .orderBy([{ column: "o.kind", order: "desc" }, "o.name", "u.email"])
    .select<MemberListRow[]>([...memberColumns, "u.identity_bound_at", refused]);
}

export async function getManagedMember(conn: Db, ownerId: string, userId: string): Promise<MemberRow | undefined> {
  return conn("users as u")
    .join("organisations as o", "o.id", "u.organisation_id")
    .where("u.id", userId)
    .where((q) => q.where("u.organisation_id", ownerId).orWhere("u.invited_by_organisation_id", ownerId))
    .first<MemberRow | undefined>(memberColumns);
}

/** Contractors this owner has engaged (any contract, past or present). */
export async function engagedContractors(conn: Db, ownerId: string): Promise<Array<{ id: string; name: string }>> {
  return conn("organisations as o")
    .whereIn("o.id", conn("contracts").where({ owner_id: ownerId }).select("contractor_id"))
    .orderBy("o.name")
    .select<Array<{ id: string; name: string }>>("o.id", "o.name");
}

// ── Administration of members (invite, change role, disable / re-enable) ──────────

/** The columns of users that the address check reads. */
type UserRecord = { email: string; organisation_id: string; invited_by_organisation_id: string | null };

export type RoleChange = { changed: boolean; member: MemberRow };
export type AccessChange = { changed: boolean; member: MemberRow; sessionsEnded: number };

const allRoles: [Role, ...Role[]] = ["administrator", "integrity_engineer", "plant_manager", "contractor_technician"];

export const inviteMemberSchema = z.object({
  email: z
    .string({ error: "Type the person’s e-mail address." })
    .trim()
    .toLowerCase()
    .min(1, "Type the person’s e-mail address.")
    .max(254, "An e-mail address has at most 254 characters.")
    .regex(/^[^@\s]+@[^@\s]+\.[^@\s]+$/, "That is not an e-mail address; it looks like name@company.com.")
    .superRefine(plainCharacters("the e-mail address")),
  name: z
    .string({ error: "Type the person’s name." })
    .trim()
    .min(1, "Type the person’s name.")
    .max(120, "Keep the name under 120 characters.")
    .superRefine(plainCharacters("the name")),
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

function mayManageMembers(user: SessionUser) {
  if (!can(user, "manageMembers")) throw new Forbidden("Your role does not allow this.");
}

/** Locks the person's row for the rest of the transaction, if this owner manages them. */
async function lockManagedMember(trx: Db, ownerId: string, userId: string): Promise<MemberRow> {
  if (!isUuid(userId)) throw new NotFoundInTenant("person");
  const id = userId.toLowerCase();
  const locked = await trx("users")
    .where({ id })
    .where((q) => q.where("organisation_id", ownerId).orWhere("invited_by_organisation_id", ownerId))
    .forUpdate()
    .first<{ id: string } | undefined>("id");
  const member = locked ? await getManagedMember(trx, ownerId, id) : undefined;
  if (!member) throw new NotFoundInTenant("person");
  return member;
}

/**
 * Invites a person by e-mail: one of the owner's own staff (an owner role), or a
 * technician of a contractor this owner has engaged. The address must be new to
 * Wallcast. The person can sign in from now on; their first sign-in activates them.
 * They are sent an invitation e-mail (through the outbox, in the same transaction).
 */
export async function inviteMember(
  conn: Db,
  admin: SessionUser,
  input: unknown,
  requestId?: string | null,
): Promise<{ userId: string }> {
  mayManageMembers(admin);
  const v = parseOrThrow(inviteMemberSchema, input);
  const ownerId = admin.organisation.id;
  // Owner roles are the owner's own staff; any other role works for one of its contractors.
  const staff = ownerRoles.includes(v.role);

  let organisationId = ownerId;
  let organisationName = admin.organisation.name;
  if (!staff) {
    if (!v.contractorId || !isUuid(v.contractorId))
      throw new Invalid({ contractorId: "Choose the contractor this technician works for." });
    const wanted = v.contractorId.toLowerCase();
    const engaged = (await engagedContractors(conn, ownerId)).find((c) => c.id === wanted);
    if (!engaged)
      throw new Invalid({ contractorId: "That company is not one of your contractors. Add a contract with it first." });
    organisationId = engaged.id;
    organisationName = engaged.name;
  }

  return auditedWrite(
    conn,
    { ownerId, actor: actorOf(admin), requestId },
    async ({ trx, record }) => {
      const existing = await trx<UserRecord>("users")
        .where({ email: v.email })
        .first("organisation_id", "invited_by_organisation_id");
      if (existing) {
        const ours = existing.organisation_id === ownerId || existing.invited_by_organisation_id === ownerId;
        throw new Invalid(duplicateAddress(v.email, ours));
      }
      const [row] = await trx("users")
        .insert({
          organisation_id: organisationId,
          email: v.email,
          name: v.name,
          role: v.role,
          status: "invited",
          invited_by_organisation_id: staff ? null : ownerId,
          invited_by_user_id: admin.id,
        })
        .returning<Array<{ id: string }>>(["id"]);
      await record({
        action: "member.invited",
        recordType: "user",
        recordId: row.id,
        after: { email: v.email, name: v.name, role: v.role, organisation: organisationName, status: "invited" },
      });
      // The invitation e-mail commits with the invitation, or neither does.
      await enqueueNotification(trx, { kind: "member.invited", userId: row.id, actorUserId: admin.id });
      return { userId: row.id };
    },
    // Two administrators inviting the same address at the same moment.
    { users_email_key: duplicateAddress(v.email, false) },
  );
}

/** Gives one of the owner's own staff another owner role. An administrator cannot change their own. */
export async function changeMemberRole(
  conn: Db,
  admin: SessionUser,
  input: { userId: unknown; role: unknown },
  requestId?: string | null,
): Promise<RoleChange> {
  mayManageMembers(admin);
  // A malformed or foreign person is a 404 before the role is looked at.
  if (!isUuid(input.userId)) throw new NotFoundInTenant("person");
  const { userId, role } = parseOrThrow(changeRoleSchema, input);
  const ownerId = admin.organisation.id;
  return auditedWrite(conn, { ownerId, actor: actorOf(admin), requestId }, async ({ trx, record }) => {
    const member = await lockManagedMember(trx, ownerId, userId);
    if (member.organisation_id !== ownerId)
      throw new Invalid({
        role: `${member.email} works for ${member.organisation_name}; a contractor technician’s role cannot change.`,
      });
    if (member.id === admin.id)
      throw new Invalid({ role: "You cannot change your own role. Ask another administrator." });
    if (member.role === role) return { changed: false, member };
    await trx("users").where({ id: member.id, organisation_id: ownerId }).update({ role, updated_at: trx.fn.now() });
    await record({
      action: "member.role_changed",
      recordType: "user",
      recordId: member.id,
      before: { email: member.email, role: member.role },
      after: { email: member.email, role },
    });
    return { changed: true, member: { ...member, role } };
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
): Promise<AccessChange> {
  mayManageMembers(admin);
  const ownerId = admin.organisation.id;
  return auditedWrite(conn, { ownerId, actor: actorOf(admin), requestId }, async ({ trx, record }) => {
    const member = await lockManagedMember(trx, ownerId, input.userId);
    if (member.id === admin.id)
      throw new Invalid({ userId: "You cannot disable yourself. Ask another administrator." });
    const status = input.access === "disabled" ? "disabled" : member.last_sign_in_at ? "active" : "invited";
    if (member.status === status || (input.access === "enabled" && member.status !== "disabled"))
      return { changed: false, member, sessionsEnded: 0 };
    await trx("users").where({ id: member.id }).update({ status, updated_at: trx.fn.now() });
    let sessionsEnded = 0;
    if (status === "disabled") {
      sessionsEnded = await destroyUserSessions(trx, member.id);
    }
    await record({
      action: status === "disabled" ? "member.disabled" : "member.enabled",
      recordType: "user",
      recordId: member.id,
      before: { email: member.email, status: member.status },
      after: { email: member.email, status, ...(status === "disabled" ? { sessions_ended: sessionsEnded } : {}) },
    });
    return { changed: true, member: { ...member, status }, sessionsEnded };
  });
}

export type IdentityReset = { changed: boolean; member: MemberRow; sessionsEnded: number };

/**
 * Forgets the identity-provider account (issuer and subject) bound to a person, so their
 * next sign-in binds again: for a person whose provider account changed, after a refused
 * sign-in. Their open sessions end. An administrator cannot reset their own.
 */
export async function resetMemberIdentity(
  conn: Db,
  admin: SessionUser,
  input: { userId: string },
  requestId?: string | null,
): Promise<IdentityReset> {
  mayManageMembers(admin);
  const ownerId = admin.organisation.id;
  return auditedWrite(conn, { ownerId, actor: actorOf(admin), requestId }, async ({ trx, record }) => {
    const member = await lockManagedMember(trx, ownerId, input.userId);
    if (member.id === admin.id)
      throw new Invalid({ userId: "You cannot reset your own sign-in identity. Ask another administrator." });
    const bound = await trx("users")
      .where({ id: member.id })
      .first<{ idp_issuer: string | null; idp_subject: string | null }>("idp_issuer", "idp_subject");
    if (!bound?.idp_subject && !bound?.idp_issuer) return { changed: false, member, sessionsEnded: 0 };
    await trx("users")
      .where({ id: member.id })
      .update({ idp_issuer: null, idp_subject: null, identity_bound_at: null, updated_at: trx.fn.now() });
    const sessionsEnded = await destroyUserSessions(trx, member.id);
    await record({
      action: "member.identity_reset",
      recordType: "user",
      recordId: member.id,
      before: { email: member.email, issuer: bound.idp_issuer, subject: bound.idp_subject },
      after: { email: member.email, issuer: null, subject: null, sessions_ended: sessionsEnded },
    });
    return { changed: true, member, sessionsEnded };
  });
}

// ── One's own profile ──────────────────────────────────────────────────────────────

/** The zone a person reads organisation-wide pages in; null returns to the default. */
export async function setOwnTimeZone(
  conn: Db,
  userId: string,
  organisationId: string,
  timeZone: string | null,
): Promise<void> {
  await conn("users")
    .where({ id: userId, organisation_id: organisationId })
    .update({ time_zone: timeZone, updated_at: conn.fn.now() });
}

/** The units a person reads numbers in (display only: values stay stored in SI). */
export async function setOwnUnits(conn: Db, userId: string, organisationId: string, units: Units): Promise<void> {
  await conn("users")
    .where({ id: userId, organisation_id: organisationId })
    .update({ units, updated_at: conn.fn.now() });
}
