import type { Db } from "../services/db.server";

/**
 * Reads of submissions (packets) that screens need beside the packet itself, each
 * scoped to the owner whose record it is.
 */

export type SubmissionStatus = "draft" | "submitted" | "returned" | "approved" | "superseded";

type SubmissionRow = {
  id: string;
  owner_id: string;
  reference: string;
  revision: number;
  status: SubmissionStatus;
  supersedes_id: string | null;
  correction_reason: string | null;
  created_at: Date;
};

export type CorrectionRow = Pick<SubmissionRow, "id" | "status" | "revision" | "correction_reason" | "created_at">;

/** The corrections opened on this owner's packet, oldest first. */
export async function correctionsOf(conn: Db, ownerId: string, submissionId: string): Promise<CorrectionRow[]> {
  return conn<SubmissionRow>("submissions")
    .where({ supersedes_id: submissionId, owner_id: ownerId })
    .orderBy("created_at")
    .select("id", "status", "revision", "correction_reason", "created_at");
}

export type CorrectedPacket = Pick<SubmissionRow, "id" | "reference" | "revision" | "status" | "correction_reason">;

/**
 * When this owner's packet is a correction: the packet it corrects, with the reason
 * given for the correction (the correction's own). Undefined for an original.
 */
export async function correctedPacketOf(
  conn: Db,
  ownerId: string,
  submissionId: string,
): Promise<CorrectedPacket | undefined> {
  return conn("submissions as s")
    .join("submissions as o", "o.id", "s.supersedes_id")
    .where({ "s.id": submissionId, "s.owner_id": ownerId })
    .first<CorrectedPacket | undefined>("o.id", "o.reference", "o.revision", "o.status", "s.correction_reason");
}
