import { Invalid, type FieldErrors } from "../../app/services/outcome";

type Failure<D> = { ok: false; errors: FieldErrors } & D;

/**
 * A model call's outcome as a value, for tests that compare whole results: the value
 * with `ok: true`, or `{ ok: false, errors, …details }` when the model threw Invalid
 * (details such as an import's row problems are spread in). Every other error (not
 * found, forbidden, conflict) is rethrown for `rejects` to check.
 */
export async function outcomeOf<T extends object, D extends object = Record<never, never>>(
  call: Promise<T>,
): Promise<({ ok: true } & T) | Failure<D>> {
  try {
    return { ok: true as const, ...(await call) };
  } catch (error) {
    if (error instanceof Invalid) return { ok: false as const, errors: error.fieldErrors, ...(error.details as D) };
    throw error;
  }
}

/** A submission read that must be of coupon results (fails the test on a thickness survey). */
export async function couponSubmission<T extends { kind: string }>(
  call: Promise<T>,
): Promise<Extract<T, { kind: "coupon" }>> {
  const detail = await call;
  if (detail.kind !== "coupon") throw new Error(`expected coupon results, got a ${detail.kind} submission`);
  return detail as Extract<T, { kind: "coupon" }>;
}
