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
