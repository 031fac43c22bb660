import { Link } from "react-router";

/**
 * "Showing 51–100 of 312" with links to the previous and next pages. The links keep
 * every other query parameter (filters) and change only `param`.
 */
export function Pager({
  total,
  number,
  size,
  search,
  param = "page",
  what = "items",
}: {
  total: number;
  number: number;
  size: number;
  /** The page's current query string (location.search). */
  search: string;
  param?: string;
  what?: string;
}) {
  const first = total === 0 ? 0 : (number - 1) * size + 1;
  const last = Math.min(total, number * size);
  const href = (n: number) => {
    const q = new URLSearchParams(search);
    if (n <= 1) q.delete(param);
    else q.set(param, String(n));
    return q.size ? `?${q}` : "?";
  };
  return (
    <nav aria-label={`Pages of ${what}`} className="no-print flex flex-wrap items-center justify-between gap-2 text-sm">
      <span className="text-ink-soft">
        Showing {first}–{last} of {total} {what}
      </span>
      <span className="flex gap-4">
        {number > 1 ? <Link to={href(number - 1)}>← Previous</Link> : null}
        {last < total ? <Link to={href(number + 1)}>Next →</Link> : null}
      </span>
    </nav>
  );
}

/** The page number asked for in a query string (1 when absent or not a whole number). */
export function pageNumberOf(url: URL, param = "page"): number {
  const raw = url.searchParams.get(param);
  return raw && /^\d{1,6}$/.test(raw) ? Math.max(1, Number(raw)) : 1;
}
