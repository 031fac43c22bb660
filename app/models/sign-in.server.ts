import type { Identity } from "../services/auth.server";
import type { Db } from "../services/db.server";
import { recordAudit } from "./audit.server";
import { findUserByEmail } from "./users.server";

export type SignInDecision =
  | { ok: true; userId: string }
  | { ok: false; reason: "unknown" | "unverified" | "disabled" };

/**
 * Identity comes from the IdP; authorisation from our database: only an invited,
 * not-disabled address with a verified e-mail gets in. The first sign-in turns an
 * invitation into an active account (audited).
 */
export async function decideSignIn(conn: Db, identity: Identity): Promise<SignInDecision> {
  if (!identity.emailVerified) return { ok: false, reason: "unverified" };
  return conn.transaction(async (trx) => {
    const user = await findUserByEmail(trx, identity.email);
    if (!user) return { ok: false, reason: "unknown" } as const;
    if (user.status === "disabled") return { ok: false, reason: "disabled" } as const;
    await trx("users")
      .where({ id: user.id })
      .update({
        status: "active",
        idp_subject: identity.subject,
        last_sign_in_at: trx.fn.now(),
        name: user.name || identity.name,
        updated_at: trx.fn.now(),
      });
    if (user.status === "invited") {
      const ownerId = user.organisation_kind === "owner" ? user.organisation_id : await invitingOwner(trx, user.id);
      if (ownerId) {
        await recordAudit(trx, {
          ownerId,
          actor: { userId: user.id, organisationId: user.organisation_id, label: user.email },
          action: "member.activated",
          recordType: "user",
          recordId: user.id,
          before: { status: "invited" },
          after: { status: "active" },
        });
      }
    }
    return { ok: true, userId: user.id } as const;
  });
}

async function invitingOwner(conn: Db, userId: string): Promise<string | null> {
  const row = await conn("users").where({ id: userId }).first("invited_by_organisation_id");
  return row?.invited_by_organisation_id ?? null;
}
