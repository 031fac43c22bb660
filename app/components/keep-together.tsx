import { cloneElement, Fragment, isValidElement, type ReactElement, type ReactNode } from "react";

/**
 * Text that must not break across lines on a narrow screen: a tag or reference
 * (ETH-CH-042, ETH-SUB-00017, a coupon serial) would otherwise break at its hyphens, a
 * date at its dashes, and a value could leave its unit on the next line (0.0355 g,
 * 0.68 mpy). The shared renderers — table cells, fact lists, page and card titles — pass
 * their content through `keepTogether`, which wraps each such run in a no-wrap span and
 * leaves the rest of the text free to wrap.
 */

/** Units as the screens print them, longest first so "g/cm³" wins over "g". */
const UNITS = [
  "mm/y",
  "g/cm³",
  "cm²",
  "mpy",
  "mdd",
  "MPa",
  "psi",
  "mg",
  "mm",
  "in",
  "°C",
  "°F",
  "g",
  "d",
  "h",
  "y",
  "%",
];

const escape = (s: string) => s.replace(/[.*+?^${}()|[\]\\/]/g, "\\$&");

const RUN = new RegExp(
  [
    // a date, with its time of day when it has one: 2026-03-01 09:00
    String.raw`\d{4}-\d{2}-\d{2}(?:[ T]\d{2}:\d{2}(?::\d{2})?)?`,
    // a value with its unit: 0.0355 g, −0.12 mm/y, 95 d, 7.86 g/cm³
    String.raw`[−-]?\d[\d.,]*[ \u00a0](?:${UNITS.map(escape).join("|")})(?![\p{L}\p{N}/])`,
    // a tag or reference: letters and digits joined by hyphens
    String.raw`[\p{L}\p{N}]+(?:-[\p{L}\p{N}]+)+`,
  ].join("|"),
  "gu",
);

/** The runs of `text` that must stay on one line, as [start, end) offsets. */
export function unbreakableRuns(text: string): Array<[number, number]> {
  const runs: Array<[number, number]> = [];
  for (const m of text.matchAll(RUN)) runs.push([m.index, m.index + m[0].length]);
  return runs;
}

function splitText(text: string): ReactNode {
  const runs = unbreakableRuns(text);
  if (runs.length === 0) return text;
  const parts: ReactNode[] = [];
  let at = 0;
  for (const [start, end] of runs) {
    if (start > at) parts.push(text.slice(at, start));
    parts.push(
      <span key={start} className="whitespace-nowrap">
        {text.slice(start, end)}
      </span>,
    );
    at = end;
  }
  if (at < text.length) parts.push(text.slice(at));
  return parts;
}

/**
 * `node` with every tag, reference, date and value-with-unit in its text kept on one
 * line. Goes into arrays and into elements whose children are plain content (host
 * elements, links); leaves other components' children alone.
 */
export function keepTogether(node: ReactNode, depth = 0): ReactNode {
  if (typeof node === "string") return splitText(node);
  if (typeof node === "number") return splitText(String(node));
  if (Array.isArray(node)) return node.map((n, i) => <Fragment key={i}>{keepTogether(n, depth)}</Fragment>);
  if (depth < 4 && isValidElement<{ children?: ReactNode }>(node)) {
    const children = node.props.children;
    if (children === undefined || children === null) return node;
    const plain = typeof children === "string" || typeof children === "number";
    if (typeof node.type === "string" || plain)
      return cloneElement(node as ReactElement<{ children?: ReactNode }>, undefined, keepTogether(children, depth + 1));
  }
  return node;
}
