import type { ReactNode } from "react";
import { keepTogether } from "./keep-together";

/** The header row of a plain (not sortable) table: column names, the last may be empty for actions. */
export function TableHead({ labels }: { labels: string[] }) {
  return (
    <thead className="bg-paper text-left text-xs uppercase tracking-wide text-ink-soft">
      <tr>
        {labels.map((h, i) => (
          <th key={`${i}-${h}`} scope="col" className="border-b border-rule px-3 py-2 font-medium">
            {h || <span className="sr-only">Actions</span>}
          </th>
        ))}
      </tr>
    </thead>
  );
}

/**
 * A cell of a plain table with the class `stack-table`: `label` is its column's header,
 * shown beside the value when the row is a card on a narrow screen; a cell without a
 * label (the row's action) spans the card. Tags, references and values with units stay
 * on one line.
 */
export function Cell({ label, className = "", children }: { label: string; className?: string; children?: ReactNode }) {
  return (
    <td data-label={label || undefined} className={`px-3 py-2 ${label ? "" : "cell-action"} ${className}`}>
      <div>{keepTogether(children)}</div>
    </td>
  );
}
