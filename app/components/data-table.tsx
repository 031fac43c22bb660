import {
  flexRender,
  getCoreRowModel,
  getFilteredRowModel,
  getSortedRowModel,
  useReactTable,
  type ColumnDef,
  type ColumnDefTemplate,
  type SortingState,
} from "@tanstack/react-table";
import { useId, useState, type ReactNode } from "react";
import { keepTogether } from "./keep-together";

/**
 * The house table: sortable headers (click or Enter), a search box over every column,
 * tabular numerals, and an empty state that says how to get data in. Below 1280 px each
 * row is a card of "header: value" pairs (app.css, `stack-table`); a column without a
 * header (the row's action) spans the card. Tags, references and values with units in
 * the cells never break across lines (`keepTogether`).
 */
/**
 * A cell's content as elements, not as a component: a column's `cell` is a plain render
 * function (no hooks), called here so that `keepTogether` sees the text it returns.
 */
function renderCell<P extends object>(cell: ColumnDefTemplate<P> | undefined, props: P): ReactNode {
  return typeof cell === "function" ? (cell as (p: P) => ReactNode)(props) : flexRender(cell, props);
}

export function DataTable<Row>({
  data,
  columns,
  empty,
  searchLabel = "Search",
  initialSorting = [],
  toolbar,
  caption,
}: {
  data: Row[];
  // TanStack's own idiom: each column has its own value type, which no single type argument can name.
  // eslint-disable-next-line @typescript-eslint/no-explicit-any
  columns: ColumnDef<Row, any>[];
  empty: ReactNode;
  searchLabel?: string;
  initialSorting?: SortingState;
  toolbar?: ReactNode;
  caption?: string;
}) {
  const [sorting, setSorting] = useState<SortingState>(initialSorting);
  const [globalFilter, setGlobalFilter] = useState("");
  const searchId = useId();
  const table = useReactTable({
    data,
    columns,
    state: { sorting, globalFilter },
    onSortingChange: setSorting,
    onGlobalFilterChange: setGlobalFilter,
    getCoreRowModel: getCoreRowModel(),
    getSortedRowModel: getSortedRowModel(),
    getFilteredRowModel: getFilteredRowModel(),
  });

  if (data.length === 0) return <>{empty}</>;
  const rows = table.getRowModel().rows;

  return (
    <div className="space-y-2">
      <div className="no-print flex flex-wrap items-end gap-3">
        <div className="w-full sm:w-auto">
          <label htmlFor={searchId} className="block text-xs font-medium text-ink-soft">
            {searchLabel}
          </label>
          <input
            id={searchId}
            type="search"
            value={globalFilter}
            onChange={(e) => setGlobalFilter(e.target.value)}
            className="mt-0.5 w-full rounded-md border border-rule bg-white px-2.5 py-1.5 text-sm sm:w-64"
            placeholder="Type to filter rows"
          />
        </div>
        {toolbar}
        <p className="ml-auto text-xs text-ink-faint" aria-live="polite">
          {rows.length} of {data.length} rows
        </p>
      </div>
      <div className="overflow-x-auto rounded-lg border border-rule bg-panel">
        <table className="stack-table min-w-full text-sm">
          {caption ? <caption className="sr-only">{caption}</caption> : null}
          <thead className="bg-paper text-left text-xs uppercase tracking-wide text-ink-soft">
            {table.getHeaderGroups().map((hg) => (
              <tr key={hg.id}>
                {hg.headers.map((header) => {
                  const sorted = header.column.getIsSorted();
                  const canSort = header.column.getCanSort();
                  const align = (header.column.columnDef.meta as { align?: string } | undefined)?.align;
                  return (
                    <th
                      key={header.id}
                      scope="col"
                      aria-sort={sorted === "asc" ? "ascending" : sorted === "desc" ? "descending" : undefined}
                      className={`border-b border-rule px-3 py-2 font-medium ${align === "right" ? "text-right" : ""}`}
                    >
                      {header.isPlaceholder ? null : canSort ? (
                        <button
                          type="button"
                          onClick={header.column.getToggleSortingHandler()}
                          className="inline-flex items-center gap-1 uppercase hover:text-ink"
                        >
                          {flexRender(header.column.columnDef.header, header.getContext())}
                          <span aria-hidden="true">{sorted === "asc" ? "▲" : sorted === "desc" ? "▼" : "↕"}</span>
                        </button>
                      ) : (
                        flexRender(header.column.columnDef.header, header.getContext())
                      )}
                    </th>
                  );
                })}
              </tr>
            ))}
          </thead>
          <tbody>
            {rows.length === 0 ? (
              <tr>
                <td colSpan={columns.length} className="cell-whole px-3 py-6 text-center text-ink-soft">
                  No rows match “{globalFilter}”. Clear the search to see all {data.length}.
                </td>
              </tr>
            ) : (
              rows.map((row) => (
                <tr key={row.id} className="border-b border-rule last:border-0 hover:bg-tide-50/50">
                  {row.getVisibleCells().map((cell) => {
                    const align = (cell.column.columnDef.meta as { align?: string } | undefined)?.align;
                    // a column headed by words labels its value on a card; one without (an action) spans the card
                    const header = cell.column.columnDef.header;
                    const label = typeof header === "string" ? header : "";
                    return (
                      <td
                        key={cell.id}
                        data-label={label || undefined}
                        className={`px-3 py-2 align-top ${align === "right" ? "text-right num" : ""} ${label ? "" : "cell-action"}`}
                      >
                        <div>{keepTogether(renderCell(cell.column.columnDef.cell, cell.getContext()))}</div>
                      </td>
                    );
                  })}
                </tr>
              ))
            )}
          </tbody>
        </table>
      </div>
    </div>
  );
}
