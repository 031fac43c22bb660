import {
  useId,
  type InputHTMLAttributes,
  type ReactNode,
  type SelectHTMLAttributes,
  type TextareaHTMLAttributes,
} from "react";

/** Field errors as the server returns them: field name → message in words. */
export type FieldErrors = Record<string, string | undefined>;

const control =
  "block w-full rounded-md border bg-white px-3 py-2 text-sm text-ink shadow-xs placeholder:text-ink-faint " +
  "focus:outline-2 focus:outline-offset-0 focus:outline-tide-500 aria-invalid:border-bad";

type Common = { label: ReactNode; error?: string; hint?: ReactNode; unit?: string };

function Frame({ id, label, error, hint, children }: Common & { id: string; children: ReactNode }) {
  return (
    <div className="space-y-1">
      <label htmlFor={id} className="block text-sm font-medium text-ink">
        {label}
      </label>
      {children}
      {hint && !error ? (
        <p id={`${id}-hint`} className="text-xs text-ink-faint">
          {hint}
        </p>
      ) : null}
      {error ? (
        <p id={`${id}-error`} className="text-xs font-medium text-bad" role="alert">
          {error}
        </p>
      ) : null}
    </div>
  );
}

function describedBy(id: string, error?: string, hint?: ReactNode) {
  return error ? `${id}-error` : hint ? `${id}-hint` : undefined;
}

export function TextField({
  label,
  error,
  hint,
  unit,
  id: givenId,
  className = "",
  ...props
}: Common & InputHTMLAttributes<HTMLInputElement>) {
  const autoId = useId();
  const id = givenId ?? autoId;
  return (
    <Frame id={id} label={label} error={error} hint={hint}>
      <div className="flex items-stretch">
        <input
          id={id}
          aria-invalid={error ? true : undefined}
          aria-describedby={describedBy(id, error, hint)}
          className={`${control} ${error ? "border-bad" : "border-rule"} ${unit ? "rounded-r-none" : ""} ${className}`}
          {...props}
        />
        {unit ? (
          <span className="inline-flex items-center rounded-r-md border border-l-0 border-rule bg-paper px-2 text-xs text-ink-soft">
            {unit}
          </span>
        ) : null}
      </div>
    </Frame>
  );
}

export function SelectField({
  label,
  error,
  hint,
  id: givenId,
  children,
  className = "",
  ...props
}: Common & SelectHTMLAttributes<HTMLSelectElement>) {
  const autoId = useId();
  const id = givenId ?? autoId;
  return (
    <Frame id={id} label={label} error={error} hint={hint}>
      <select
        id={id}
        aria-invalid={error ? true : undefined}
        aria-describedby={describedBy(id, error, hint)}
        className={`${control} ${error ? "border-bad" : "border-rule"} ${className}`}
        {...props}
      >
        {children}
      </select>
    </Frame>
  );
}

export function TextAreaField({
  label,
  error,
  hint,
  id: givenId,
  className = "",
  ...props
}: Common & TextareaHTMLAttributes<HTMLTextAreaElement>) {
  const autoId = useId();
  const id = givenId ?? autoId;
  return (
    <Frame id={id} label={label} error={error} hint={hint}>
      <textarea
        id={id}
        aria-invalid={error ? true : undefined}
        aria-describedby={describedBy(id, error, hint)}
        className={`${control} ${error ? "border-bad" : "border-rule"} ${className}`}
        {...props}
      />
    </Frame>
  );
}

export function CheckboxField({
  label,
  error,
  id: givenId,
  ...props
}: { label: ReactNode; error?: string } & InputHTMLAttributes<HTMLInputElement>) {
  const autoId = useId();
  const id = givenId ?? autoId;
  return (
    <div className="space-y-1">
      <div className="flex items-center gap-2">
        <input id={id} type="checkbox" className="size-4 rounded border-rule accent-tide-700 touch:size-5" {...props} />
        <label htmlFor={id} className="text-sm text-ink touch:flex touch:min-h-11 touch:items-center">
          {label}
        </label>
      </div>
      {error ? (
        <p className="text-xs font-medium text-bad" role="alert">
          {error}
        </p>
      ) : null}
    </div>
  );
}

/** A form-level message (e.g. "Nothing was saved: 2 fields need attention"). */
export function FormAlert({ children, tone = "bad" }: { children: ReactNode; tone?: "bad" | "ok" | "warn" }) {
  const tones = {
    bad: "border-bad/40 bg-sev-severe-bg text-bad",
    ok: "border-ok/40 bg-sev-low-bg text-ok",
    warn: "border-warn/40 bg-sev-moderate-bg text-warn",
  };
  return (
    <div role={tone === "bad" ? "alert" : "status"} className={`rounded-md border px-3 py-2 text-sm ${tones[tone]}`}>
      {children}
    </div>
  );
}

/**
 * A 409 Conflict on a form: the record changed after the page was opened. Says so and
 * offers a reload (a fresh GET of this page shows the current state and version).
 */
export function StaleAlert({ message }: { message: string }) {
  return (
    <FormAlert tone="warn">
      {message}{" "}
      <a href="" className="font-medium">
        Reload this page
      </a>
    </FormAlert>
  );
}
