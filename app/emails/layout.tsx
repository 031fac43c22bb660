import type { ReactNode } from "react";

/**
 * The frame every Wallcast e-mail shares: the product's calm neutral look in inline
 * styles (mail clients drop style sheets and web fonts are not guaranteed, so Work Sans
 * falls back to the system sans-serif).
 *
 * The same markup gives the plain-text part (see render.server.ts): `data-skip-in-text`
 * marks what only makes sense in HTML, `data-text-label` gives a block a label in text,
 * and the action link is written as "label: address".
 */

const font = "'Work Sans', ui-sans-serif, system-ui, -apple-system, 'Segoe UI', Roboto, Helvetica, Arial, sans-serif";
const ink = "#1d2125";
const inkSoft = "#4a5057";
const rule = "#dcdcd6";
const paper = "#f7f7f5";

const paragraph = { margin: "0 0 12px" } as const;
const cell = { border: `1px solid ${rule}`, padding: "4px 8px", textAlign: "left", verticalAlign: "top" } as const;

export type EmailAction = { label: string; url: string };

export function EmailLayout(props: {
  subject: string;
  greeting: string;
  action: EmailAction;
  footer: string;
  children: ReactNode;
}) {
  const name = props.greeting.trim();
  return (
    <html lang="en">
      <head>
        <meta charSet="utf-8" />
        <meta name="viewport" content="width=device-width, initial-scale=1" />
        <title>{oneLine(props.subject)}</title>
      </head>
      <body
        style={{
          margin: 0,
          padding: "16px",
          background: paper,
          fontFamily: font,
          fontSize: "15px",
          lineHeight: 1.45,
          color: ink,
        }}
      >
        <div
          style={{
            maxWidth: "640px",
            margin: "0 auto",
            background: "#ffffff",
            border: `1px solid ${rule}`,
            borderRadius: "8px",
            padding: "20px",
          }}
        >
          <p data-skip-in-text="true" style={{ ...paragraph, fontSize: "13px", fontWeight: 600, color: "#1b4f5c" }}>
            Wallcast
          </p>
          <p style={paragraph}>{name ? `Hello ${name},` : "Hello,"}</p>
          {props.children}
          <p style={{ margin: "16px 0" }}>
            <a
              href={props.action.url}
              data-text="action"
              style={{
                display: "inline-block",
                background: "#236473",
                color: "#ffffff",
                textDecoration: "none",
                padding: "8px 14px",
                borderRadius: "6px",
              }}
            >
              {props.action.label}
            </a>
          </p>
          <p data-skip-in-text="true" style={{ ...paragraph, fontSize: "13px", color: inkSoft }}>
            Or paste this address into your browser: {props.action.url}
          </p>
          <p data-text="signature" style={{ margin: "16px 0 0", fontSize: "12px", color: inkSoft }}>
            {props.footer}
          </p>
        </div>
      </body>
    </html>
  );
}

export function Paragraph({ children }: { children: ReactNode }) {
  return <p style={paragraph}>{children}</p>;
}

/** A person's words (a reason, a comment), line breaks kept. */
export function Quote({ label, text }: { label: string; text: string }) {
  const lines = text.split(/\r?\n/);
  return (
    <>
      <p style={{ margin: "0 0 4px", fontWeight: "bold" }}>{label}:</p>
      <blockquote
        style={{ margin: "0 0 12px", padding: "8px 12px", borderLeft: "4px solid #7fb3bd", background: paper }}
      >
        {lines.map((line, i) => (
          <span key={i}>
            {i > 0 ? <br /> : null}
            {line}
          </span>
        ))}
      </blockquote>
    </>
  );
}

export function DataTable({ head, rows }: { head: string[]; rows: string[][] }) {
  return (
    <table data-text-format="dataTable" style={{ borderCollapse: "collapse", margin: "0 0 12px", fontSize: "14px" }}>
      <thead>
        <tr>
          {head.map((h) => (
            <th key={h} scope="col" style={{ ...cell, background: "#eef6f7" }}>
              {h}
            </th>
          ))}
        </tr>
      </thead>
      <tbody>
        {rows.map((row, i) => (
          <tr key={i}>
            {row.map((c, j) => (
              <td key={j} style={cell}>
                {c}
              </td>
            ))}
          </tr>
        ))}
      </tbody>
    </table>
  );
}

/** The engineering caution, set apart. */
export function Caution({ text }: { text: string }) {
  return (
    <p
      role="note"
      data-text-label="CAUTION:"
      style={{
        ...paragraph,
        padding: "8px 12px",
        borderLeft: "4px solid #1f5f6b",
        background: "#f3f5f6",
        color: "#1d2a30",
      }}
    >
      {text}
    </p>
  );
}

/** A subject is one line: line breaks (from a name, say) become spaces. */
export function oneLine(text: string): string {
  return text.replace(/\s*[\r\n\u2028\u2029]+\s*/g, " ").trim();
}

/** "1 coupon result", "2 coupon results". */
export const count = (n: number, noun: string) => `${n} ${noun}${n === 1 ? "" : "s"}`;

/** What a submission is, for the e-mails about it: coupon results, or a thickness survey on its circuits. */
export type SubmissionKindFacts = {
  /** Absent or "coupon" for coupon results. */
  kind?: "coupon" | "thickness";
  /** A thickness survey's circuits, by tag. */
  circuitTags?: string[];
};

/** "Submission PA-SUB-00012" or "Thickness survey PA-SUB-00012", at the start of a sentence or subject. */
export const submissionTitle = (p: SubmissionKindFacts & { reference: string }) =>
  `${p.kind === "thickness" ? "Thickness survey" : "Submission"} ${p.reference}`;

/** The same inside a sentence. */
export const submissionNoun = (p: SubmissionKindFacts & { reference: string }) =>
  `${p.kind === "thickness" ? "thickness survey" : "submission"} ${p.reference}`;

/** " — 14 readings on circuits C-1, C-2" after a survey's reference; nothing for coupon results. */
export const surveyNote = (p: SubmissionKindFacts & { resultCount?: number }) => {
  if (p.kind !== "thickness") return "";
  const tags = p.circuitTags ?? [];
  const readings = p.resultCount === undefined ? "" : count(p.resultCount, "reading");
  const on = tags.length ? `on ${tags.length === 1 ? "circuit" : "circuits"} ${tags.join(", ")}` : "";
  const text = [readings, on].filter(Boolean).join(" ");
  return text ? ` — ${text}` : "";
};

/** " (revision 2)" after a submission reference, nothing for the first revision. */
export const revisionNote = (revision: number) => (revision > 1 ? ` (revision ${revision})` : "");
