import { CAUTION_BODY, CAUTION_LEAD } from "../services/caution";
import type { ReactNode } from "react";
import { keepTogether } from "./keep-together";

export function PageHeader({
  title,
  question,
  actions,
  children,
}: {
  title: ReactNode;
  /** The one question this screen answers, in the user's words. */
  question?: ReactNode;
  actions?: ReactNode;
  children?: ReactNode;
}) {
  return (
    <header className="mb-6 flex flex-wrap items-end justify-between gap-4 border-b border-rule pb-4">
      <div className="min-w-0">
        <h1 className="text-2xl font-semibold tracking-tight text-ink">{keepTogether(title)}</h1>
        {question ? <p className="mt-1 text-sm text-ink-soft">{question}</p> : null}
        {children}
      </div>
      {actions ? <div className="no-print flex flex-wrap items-center gap-2">{actions}</div> : null}
    </header>
  );
}

export function Card({
  title,
  children,
  actions,
  className = "",
}: {
  title?: ReactNode;
  children: ReactNode;
  actions?: ReactNode;
  className?: string;
}) {
  return (
    <section className={`min-w-0 rounded-lg border border-rule bg-panel p-4 ${className}`}>
      {title || actions ? (
        <div className="mb-3 flex flex-wrap items-center justify-between gap-2">
          {title ? <h2 className="text-base font-semibold text-ink">{keepTogether(title)}</h2> : <span />}
          {actions}
        </div>
      ) : null}
      {children}
    </section>
  );
}

export function EmptyState({
  title,
  children,
  action,
}: {
  title: ReactNode;
  children?: ReactNode;
  action?: ReactNode;
}) {
  return (
    <div className="rounded-lg border border-dashed border-rule bg-panel px-6 py-10 text-center">
      <p className="text-base font-medium text-ink">{title}</p>
      {children ? <div className="mx-auto mt-2 max-w-prose text-sm text-ink-soft">{children}</div> : null}
      {action ? <div className="mt-4">{action}</div> : null}
    </div>
  );
}

/**
 * Key–value list for record pages: side by side from 640 px, the value under its label
 * on a phone. Tags, references and values with units stay on one line.
 */
export function Facts({ items }: { items: Array<[ReactNode, ReactNode]> }) {
  return (
    <dl className="grid grid-cols-1 gap-x-6 text-sm sm:grid-cols-[max-content_minmax(0,1fr)] sm:gap-y-1.5">
      {items.map(([k, v], i) => (
        <div key={i} className="contents">
          <dt className="text-xs text-ink-soft sm:text-sm">{k}</dt>
          <dd className="num mb-2.5 break-words text-ink last:mb-0 sm:mb-0">{keepTogether(v)}</dd>
        </div>
      ))}
    </dl>
  );
}

/**
 * The caution that travels with every number that can drive a decision about a
 * pressurised line (remaining life, next inspection, severity).
 */
export function EngineeringCaution({ compact = false }: { compact?: boolean }) {
  return (
    <aside
      role="note"
      aria-label="Engineering caution"
      // Neutral with the accent's rule: it must not share a colour with any severity grade.
      className={`rounded-md border border-rule border-l-4 border-l-tide-600 bg-paper text-ink ${compact ? "px-2 py-1 text-xs" : "px-3 py-2 text-sm"}`}
    >
      <strong className="font-semibold">{CAUTION_LEAD}</strong> {CAUTION_BODY}
    </aside>
  );
}
