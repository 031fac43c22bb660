import type { Knex } from "knex";

/**
 * Remaining life of circuits: recomputes the derived rows (circuit_life and cml_life, a new
 * version per circuit; earlier versions are kept) from approved readings, approved coupon
 * results, the circuit's design data and the owner's rate policy. Approved data is never
 * touched. Runs inside the caller's transaction (an approval computes in the approving
 * transaction).
 */

export type LifeCause = "approval" | "recompute" | "design" | "policy" | "thresholds";

export type RecomputeRequest = {
  ownerId: string;
  /** The circuits to recompute; all of the owner's circuits when omitted. */
  circuitIds?: string[];
  cause: LifeCause;
  /** The approved submission that caused it (cause "approval"). */
  causeSubmissionId?: string | null;
  /** The recompute run that caused it (cause "recompute", "design", "policy", "thresholds"). */
  runId?: string | null;
};

export type RecomputeOutcome = {
  circuits: number;
  /** CMLs that were not below required thickness before this computation and are now. */
  newlyBelowRequired: Array<{ circuitId: string; cmlId: string }>;
};

export async function recomputeCircuitLife(
  trx: Knex.Transaction,
  request: RecomputeRequest,
): Promise<RecomputeOutcome> {
  void trx;
  void request;
  // Replaced by the life computation in the same issue; nothing calls it on main before then.
  return { circuits: 0, newlyBelowRequired: [] };
}
