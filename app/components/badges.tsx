export type SeverityWord = "low" | "moderate" | "high" | "severe";

const severitySteps: Record<SeverityWord, number> = { low: 1, moderate: 2, high: 3, severe: 4 };
const severityTone: Record<SeverityWord, string> = {
  low: "bg-sev-low-bg text-sev-low border-sev-low/30",
  moderate: "bg-sev-moderate-bg text-sev-moderate border-sev-moderate/30",
  high: "bg-sev-high-bg text-sev-high border-sev-high/30",
  severe: "bg-sev-severe-bg text-sev-severe border-sev-severe/40",
};

/**
 * Severity as a word first, with a four-step meter so the grade reads without colour
 * (printing, colour-blind readers).
 */
export function SeverityBadge({ value, emphasise = false }: { value: SeverityWord; emphasise?: boolean }) {
  const steps = severitySteps[value];
  return (
    <span
      className={`inline-flex items-center gap-1.5 rounded border px-1.5 py-0.5 text-xs font-medium ${severityTone[value]} ${emphasise ? "ring-1 ring-current" : ""}`}
      title={`Severity: ${value} (${steps} of 4)`}
    >
      <span>{value}</span>
      <span aria-hidden="true" className="inline-flex gap-px">
        {[1, 2, 3, 4].map((i) => (
          <span
            key={i}
            className={`inline-block h-2.5 w-1 rounded-sm ${i <= steps ? "bg-current" : "bg-current/15"}`}
          />
        ))}
      </span>
    </span>
  );
}

const statusTone: Record<string, string> = {
  draft: "bg-paper text-ink-soft border-rule",
  submitted: "bg-tide-50 text-tide-700 border-tide-300",
  returned: "bg-sev-moderate-bg text-sev-moderate border-sev-moderate/30",
  approved: "bg-sev-low-bg text-ok border-ok/30",
  superseded: "bg-paper text-ink-faint border-rule line-through",
  active: "bg-sev-low-bg text-ok border-ok/30",
  ended: "bg-paper text-ink-faint border-rule",
  upcoming: "bg-tide-50 text-tide-700 border-tide-300",
  disabled: "bg-paper text-ink-faint border-rule",
  invited: "bg-tide-50 text-tide-700 border-tide-300",
  revoked: "bg-paper text-ink-faint border-rule",
  expired: "bg-paper text-ink-faint border-rule",
  overdue: "bg-sev-severe-bg text-sev-severe border-sev-severe/40",
  due: "bg-sev-moderate-bg text-sev-moderate border-sev-moderate/30",
  "in service": "bg-paper text-ink-soft border-rule",
};

/** A record's state as a word, always readable as text. */
export function StatusBadge({ status, label }: { status: string; label?: string }) {
  return (
    <span
      className={`inline-flex items-center rounded border px-1.5 py-0.5 text-xs font-medium ${statusTone[status] ?? statusTone.draft}`}
    >
      {label ?? status}
    </span>
  );
}
