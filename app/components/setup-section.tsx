import type { ReactNode } from "react";
import { useNavigate } from "react-router";
import { FormAlert } from "./field";
import { Card } from "./layout";

/** The set-up pages' sections and form cards. */

export function Section({
  id,
  title,
  intro,
  children,
}: {
  id: string;
  title: string;
  intro: string;
  children: ReactNode;
}) {
  return (
    <section id={id} aria-labelledby={`${id}-heading`} className="scroll-mt-4 space-y-3">
      <div>
        <h2 id={`${id}-heading`} className="text-lg font-semibold">
          {title}
        </h2>
        <p className="text-sm text-ink-soft">{intro}</p>
      </div>
      {children}
    </section>
  );
}

/** A form in a card, with the "nothing was saved" line; Escape leaves an edit. */
export function FormCard({
  id,
  title,
  errors,
  cancelTo,
  children,
}: {
  id?: string;
  title: string;
  errors: Record<string, string | undefined>;
  cancelTo?: string;
  children: ReactNode;
}) {
  const navigate = useNavigate();
  const count = Object.values(errors).filter(Boolean).length;
  return (
    <div
      id={id}
      className="scroll-mt-4"
      onKeyDown={cancelTo ? (e) => e.key === "Escape" && navigate(cancelTo, { preventScrollReset: true }) : undefined}
    >
      <Card title={title}>
        {count > 0 ? (
          <div className="mb-3">
            <FormAlert>
              Nothing was saved: {count === 1 ? "one field needs" : `${count} fields need`} attention.
            </FormAlert>
          </div>
        ) : null}
        {children}
      </Card>
    </div>
  );
}
