import { render, toPlainText } from "@react-email/render";
import type { ReactElement } from "react";
import { oneLine } from "./layout";

/**
 * An e-mail component rendered to what the outbox stores: the HTML part, the plain-text
 * part converted from the same HTML, and a one-line subject.
 */

// html-to-text's formatter hooks, typed as far as we use them.
type TextBuilder = {
  openBlock(options?: { leadingLineBreaks?: number }): void;
  closeBlock(options?: { trailingLineBreaks?: number }): void;
  addInline(text: string): void;
  addLiteral(text: string): void;
  addLineBreak(): void;
};
type TextElement = { attribs?: Record<string, string>; children: unknown[] };
type Walk = (nodes: unknown[], builder: TextBuilder) => void;

const textOptions = {
  formatters: {
    /** "Review the submission: https://…" */
    actionLink(elem: TextElement, walk: Walk, builder: TextBuilder) {
      builder.openBlock({ leadingLineBreaks: 2 });
      walk(elem.children, builder);
      builder.addInline(`: ${elem.attribs?.href ?? ""}`);
      builder.closeBlock({ trailingLineBreaks: 2 });
    },
    /** A block that starts with its label in text ("CAUTION: …"). */
    labelledBlock(elem: TextElement, walk: Walk, builder: TextBuilder) {
      builder.openBlock({ leadingLineBreaks: 2 });
      builder.addInline(`${elem.attribs?.["data-text-label"] ?? ""} `);
      walk(elem.children, builder);
      builder.closeBlock({ trailingLineBreaks: 2 });
    },
    /** The footer after the usual "-- " signature line. */
    signature(elem: TextElement, walk: Walk, builder: TextBuilder) {
      builder.openBlock({ leadingLineBreaks: 2 });
      builder.addLiteral("-- ");
      builder.addLineBreak();
      walk(elem.children, builder);
      builder.closeBlock({ trailingLineBreaks: 1 });
    },
  },
  selectors: [
    { selector: "a[data-text=action]", format: "actionLink" },
    { selector: "[data-text-label]", format: "labelledBlock" },
    { selector: "[data-text=signature]", format: "signature" },
    {
      selector: "table[data-text-format=dataTable]",
      format: "dataTable",
      options: { uppercaseHeaderCells: false, colSpacing: 2 },
    },
  ],
};

export async function renderEmail(
  subject: string,
  email: ReactElement,
): Promise<{ subject: string; html: string; text: string }> {
  const html = await render(email);
  const text = `${toPlainText(html, textOptions)}\n`;
  return { subject: oneLine(subject), html, text };
}
