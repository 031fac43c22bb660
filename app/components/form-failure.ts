import { useLocation } from "react-router";

/**
 * The component half of the form idiom (the server half is `formAction` in
 * app/services/respond.server.ts): after a failed submit, the errors and what was typed,
 * for the one form on the page that was sent.
 *
 *   const form = formFailure(actionData, { intent: "createUnit" });
 *   <TextField name="tag" defaultValue={form.value("tag", unit.tag)} error={form.errors.tag} />
 *
 * Inputs are uncontrolled: after a failed submit in the browser they still hold what was
 * typed, and a page rendered on the server (no JavaScript) gets it from `values`. So no
 * form is ever remounted to show values again.
 */
export type FormFailureData = {
  errors?: Record<string, string>;
  values?: Record<string, string>;
  intent?: string | null;
  id?: string | null;
  details?: Record<string, unknown>;
};

export type FormView = {
  errors: Record<string, string | undefined>;
  /** What was typed in `name`, or the stored value when this form was not sent. */
  value(name: string, stored?: string | number | null): string | undefined;
  /** How many fields need correcting. */
  count: number;
  sent: boolean;
};

export function formFailure(
  actionData: FormFailureData | null | undefined,
  match: { intent?: string; id?: string | null } = {},
): FormView {
  const sent = Boolean(
    actionData &&
    actionData.errors &&
    (match.intent === undefined || actionData.intent === match.intent) &&
    (match.id === undefined || actionData.id === match.id),
  );
  const errors = sent ? (actionData?.errors ?? {}) : {};
  const values = sent ? (actionData?.values ?? {}) : {};
  return {
    errors,
    sent,
    count: Object.values(errors).filter(Boolean).length,
    value: (name, stored) =>
      name in values ? values[name] : stored === null || stored === undefined ? undefined : String(stored),
  };
}

/**
 * A key for a form that must start afresh after each navigation (a saved form clears; a
 * failed one keeps what was typed, since a failure does not navigate) and when it
 * switches to another record.
 */
export function useFormKey(...parts: Array<string | null | undefined>): string {
  const location = useLocation();
  return [...parts.map((p) => p ?? ""), location.key].join("-");
}
