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
