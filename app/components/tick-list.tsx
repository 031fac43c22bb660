import type { ReactNode } from "react";
import { CheckboxField } from "./field";
import type { FormView } from "./form-failure";

/**
 * Lists of tick boxes in the one form idiom. Each box is its own text field
 * `<list>.<value>` with a hidden "off" before it, so the form's text values (readForm)
 * say which boxes were ticked and which were not, and `formFailure` gives each box back
 * as it was sent. The action turns the fields back into the list with `tickedOf`.
 */
export const tickName = (list: string, value: string) => `${list}.${value}`;

/** The values of the ticked boxes of a list, in the order the form sent them. */
export function tickedOf(values: Record<string, string>, list: string): string[] {
  const prefix = `${list}.`;
  return Object.entries(values)
    .filter(([name, value]) => name.startsWith(prefix) && value === "on")
    .map(([name]) => name.slice(prefix.length));
}

export function TickBox({
  form,
  list,
  value,
  stored,
  label,
}: {
  form: FormView;
  list: string;
  value: string;
  /** Ticked when the page shows the stored record (not a failed submit). */
  stored: boolean;
  label: ReactNode;
}) {
  const name = tickName(list, value);
  return (
    <>
      <input type="hidden" name={name} value="off" />
      <CheckboxField
        name={name}
        value="on"
        defaultChecked={form.value(name, stored ? "on" : "off") === "on"}
        label={label}
      />
    </>
  );
}
