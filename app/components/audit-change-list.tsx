import type { AuditChange } from "~/services/audit-words";

/** An audit event's changed fields: "field: before → after", wrapping inside its column. */
export function AuditChangeList({ changes }: { changes: AuditChange[] }) {
  if (changes.length === 0) return <span className="text-ink-faint">—</span>;
  return (
    <ul className="min-w-56 max-w-md space-y-0.5 text-xs break-words whitespace-normal">
      {changes.map((c) => (
        <li key={c.field}>
          <span className="font-medium">{c.field}</span>:{" "}
          {c.before !== null ? (
            <>
              <del className="text-ink-faint">{c.before}</del> →{" "}
            </>
          ) : null}
          <span>{c.after ?? "—"}</span>
        </li>
      ))}
    </ul>
  );
}
