import type { Identity } from "../services/auth.server";
import type { Db } from "../services/db.server";
import { auditedWrite } from "./audit.server";
import { findUserByEmail } from "./users.server";

/**
 * Why a verified identity does not get in (shown on the no-access page). `identity`:
 * the address is bound to another account at the identity provider (another subject or
 * issuer than the first sign-in's), or this provider account is bound to another person.
 */
export type SignInRefusal = "unknown" | "unverified" | "disabled" | "identity";

/**
 * Whether an identity gets a session: a decision, not an error (a refusal is an
 * ordinary answer that leads to the no-access page, never to an error boundary).
 */
export type SignInDecision = { admitted: true; userId: string } | { admitted: false; reason: SignInRefusal };

type UserSignInRecord = {
  id: string;
  status: "invited" | "active" | "disabled";
  idp_issuer: string | null;
  idp_subject: string | null;
};

/**
 * Identity comes from the IdP; authorisation from our database: only an invited,
 * not-disabled address with a verified e-mail gets in, and only with the provider account
 * (issuer and subject) its first sign-in bound to the person. The first sign-in binds
 * them and turns an invitation into an active account; a later sign-in with the same
 * address but another issuer or subject is refused until an administrator resets the
 * binding (`resetMemberIdentity`). Every sign-in of a known person, admitted or refused,
 * is recorded in the trail of the owner the person belongs to, or of the owner that
 * invited the contractor's technician.
 */
export async function decideSignIn(conn: Db, identity: Identity, requestId?: string | null): Promise<SignInDecision> {
  const user = await findUserByEmail(conn, identity.email);
  if (!user) return { admitted: false, reason: identity.emailVerified ? "unknown" : "unverified" };
  const ownerId = user.organisation_kind === "owner" ? user.organisation_id : user.invited_by_organisation_id;
  const actor = { userId: user.id, organisationId: user.organisation_id, label: user.email };
  const presented = { issuer: identity.issuer, subject: identity.subject };
  // A technician no owner invited has no trail to write to; nothing is recorded for them.
  return auditedWrite(conn, { ownerId: ownerId ?? user.organisation_id, actor, requestId }, async ({ trx, record }) => {
    const audit = async (event: Parameters<typeof record>[0]) => {
      if (ownerId) await record(event);
    };
    const refuse = async (reason: SignInRefusal, why: string, bound?: Record<string, unknown>) => {
      await audit({
        action: "sign_in.refused",
        recordType: "user",
        recordId: user.id,
        ...(bound ? { before: bound } : {}),
        after: { email: user.email, refusal: why, ...presented },
      });
      return { admitted: false, reason } as const;
    };

    // Locked and read again: an administrator may disable the person or reset the binding now.
    const current = await trx<UserSignInRecord>("users")
      .where({ id: user.id })
      .forUpdate()
      .first("id", "status", "idp_issuer", "idp_subject");
    if (!current) return { admitted: false, reason: "unknown" } as const;
    if (!identity.emailVerified) return refuse("unverified", "email_unverified");
    if (current.status === "disabled") return refuse("disabled", "person_disabled");

    const bound = { issuer: current.idp_issuer, subject: current.idp_subject };
    if (current.idp_subject !== null) {
      const sameSubject = current.idp_subject === identity.subject;
      const sameIssuer = current.idp_issuer === null || current.idp_issuer === identity.issuer;
      if (!sameSubject || !sameIssuer) return refuse("identity", "identity_mismatch", bound);
    }
    if (current.idp_subject === null || current.idp_issuer === null) {
      // Binding: no other person may hold this provider account already.
      const holder = await trx("users")
        .whereNot({ id: user.id })
        .where({ idp_issuer: identity.issuer, idp_subject: identity.subject })
        .first("id");
      if (holder) return refuse("identity", "identity_in_use", bound);
      // Two people binding one provider account at the same instant: the unique index stops
      // the second inside a savepoint, and that sign-in is refused like any account in use.
      try {
        await trx.transaction((sp) =>
          sp("users")
            .where({ id: user.id })
            .update({ idp_issuer: identity.issuer, idp_subject: identity.subject, identity_bound_at: sp.fn.now() }),
        );
      } catch (error) {
        if ((error as { code?: string }).code === "23505") return refuse("identity", "identity_in_use", bound);
        throw error;
      }
      await audit({
        action: "member.identity_bound",
        recordType: "user",
        recordId: user.id,
        before: bound,
        after: presented,
      });
    }

    await trx("users")
      .where({ id: user.id })
      .update({
        status: "active",
        last_sign_in_at: trx.fn.now(),
        name: user.name || identity.name,
        updated_at: trx.fn.now(),
      });
    if (current.status === "invited")
      await audit({
        action: "member.activated",
        recordType: "user",
        recordId: user.id,
        before: { status: "invited" },
        after: { status: "active" },
      });
    await audit({ action: "sign_in.admitted", recordType: "user", recordId: user.id, after: { email: user.email } });
    return { admitted: true, userId: user.id } as const;
  });
}
