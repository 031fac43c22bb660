import { FormAlert } from "./field";

/** One problem of a refused CSV import: the file line (1 = header), the column, what is wrong. */
export type CsvProblemView = { line: number; column: string | null; message: string };

/** The refused import's problems, by line and column, and that nothing was imported. */
export function CsvProblems({
  problems,
  textKept = false,
  id = "import-problems",
}: {
  problems: CsvProblemView[];
  textKept?: boolean;
  id?: string;
}) {
  return (
    <div className="mt-4 space-y-2" id={id}>
      <FormAlert>
        Nothing was imported: {problems.length === 1 ? "one problem" : `${problems.length} problems`} to correct
        {textKept ? " (the file’s text is in the box below; correct it there or in the file)" : ""}.
      </FormAlert>
      <div className="max-h-80 overflow-auto rounded-md border border-rule">
        <table className="min-w-full text-sm">
          <caption className="sr-only">Problems found in the CSV file</caption>
          <thead className="sticky top-0 bg-paper text-left text-xs uppercase tracking-wide text-ink-soft">
            <tr>
              <th scope="col" className="px-3 py-1.5 text-right">
                Line
              </th>
              <th scope="col" className="px-3 py-1.5">
                Column
              </th>
              <th scope="col" className="px-3 py-1.5">
                Problem
              </th>
            </tr>
          </thead>
          <tbody>
            {problems.map((p, i) => (
              <tr key={i} className="border-t border-rule align-top">
                <td className="num px-3 py-1.5 text-right">{p.line}</td>
                <td className="px-3 py-1.5 font-mono text-xs">{p.column ?? "—"}</td>
                <td className="px-3 py-1.5">{p.message}</td>
              </tr>
            ))}
          </tbody>
        </table>
      </div>
    </div>
  );
}

/** The columns of an import's template, each with what it holds, folded under "The columns". */
export function CsvColumns({ columns }: { columns: ReadonlyArray<{ name: string; help: string }> }) {
  return (
    <details className="mt-3 text-sm">
      <summary className="cursor-pointer font-medium">The columns</summary>
      <table className="mt-2 text-sm">
        <tbody>
          {columns.map((c) => (
            <tr key={c.name}>
              <td className="pr-4 font-mono text-xs">{c.name}</td>
              <td className="text-ink-soft">{c.help}</td>
            </tr>
          ))}
        </tbody>
      </table>
    </details>
  );
}

/** The file box of a CSV import form, with the file's error under it. */
export function CsvFileInput({ error }: { error?: string | null }) {
  return (
    <div>
      <label htmlFor="file" className="block text-sm font-medium">
        CSV file
      </label>
      <input
        id="file"
        name="file"
        type="file"
        accept=".csv,text/csv"
        required
        className="mt-1 text-sm touch:min-h-11"
        aria-describedby={error ? "file-error" : undefined}
      />
      {error ? (
        <p id="file-error" role="alert" className="mt-1 text-xs font-medium text-bad">
          {error}
        </p>
      ) : null}
    </div>
  );
}
