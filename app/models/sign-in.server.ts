import type { Identity } from "../services/auth.server";
import type { Db } from "../services/db.server";
import { auditedWrite } from "./audit.server";
import { findUserByEmail } from "./users.server";

/** Why a verified identity does not get in (shown on the no-access page). */
export type SignInRefusal = "unknown" | "unverified" | "disabled";

/**
 * Whether an identity gets a session: a decision, not an error (a refusal is an
 * ordinary answer that leads to the no-access page, never to an error boundary).
 */
export type SignInDecision = { admitted: true; userId: string } | { admitted: false; reason: SignInRefusal };

type UserStatusRecord = { id: string; status: "invited" | "active" | "disabled" };

/**
 * Identity comes from the IdP; authorisation from our database: only an invited,
 * not-disabled address with a verified e-mail gets in. The first sign-in turns an
 * invitation into an active account (audited in the trail of the owner the person
 * belongs to, or of the owner that invited the contractor's technician).
 */
export async function decideSignIn(conn: Db, identity: Identity): Promise<SignInDecision> {
  if (!identity.emailVerified) return { admitted: false, reason: "unverified" };
  const user = await findUserByEmail(conn, identity.email);
  if (!user) return { admitted: false, reason: "unknown" };
  const ownerId = user.organisation_kind === "owner" ? user.organisation_id : user.invited_by_organisation_id;
  const actor = { userId: user.id, organisationId: user.organisation_id, label: user.email };
  // A technician no owner invited has no trail to write to; nothing is recorded for them.
  return auditedWrite(conn, { ownerId: ownerId ?? user.organisation_id, actor }, async ({ trx, record }) => {
    // Locked and read again: an administrator may disable the person at this moment.
    const current = await trx<UserStatusRecord>("users").where({ id: user.id }).forUpdate().first("id", "status");
    if (!current) return { admitted: false, reason: "unknown" } as const;
    if (current.status === "disabled") return { admitted: false, reason: "disabled" } as const;
    await trx("users")
      .where({ id: user.id })
      .update({
        status: "active",
        idp_subject: identity.subject,
        last_sign_in_at: trx.fn.now(),
        name: user.name || identity.name,
        updated_at: trx.fn.now(),
      });
    if (current.status === "invited" && ownerId)
      await record({
        action: "member.activated",
        recordType: "user",
        recordId: user.id,
        before: { status: "invited" },
        after: { status: "active" },
      });
    return { admitted: true, userId: user.id } as const;
  });
}
