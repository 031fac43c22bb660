import { z } from "zod";
import { isUuid } from "./ids";
import { Invalid } from "./outcome";

/**
 * Field rules shared by every form, CSV import and JSON body: one rule per kind of
 * field (text, tag, decimal with its unit and places, whole number, checkbox, id), each
 * with its message in words. Pure: the browser validates with the same rules.
 */

/** Values a form sends (strings), or typed values from code; the schemas accept both. */
export type FormInput = Record<string, unknown>;

export const blank = (v: unknown) => v === undefined || v === null || (typeof v === "string" && v.trim() === "");

// eslint-disable-next-line no-control-regex -- control characters are exactly what is refused
const controlCharacter = /[\u0000-\u0008\u000b\u000c\u000e-\u001f\u007f]/;
const lineBreakOrTab = /[\t\n\r]/;
const loneSurrogate = /[\uD800-\uDBFF](?![\uDC00-\uDFFF])|(?<![\uD800-\uDBFF])[\uDC00-\uDFFF]/;

/**
 * What is wrong with text as characters, in words, or null: control characters (tab and
 * line breaks only where the text has several lines), half of a character (an unpaired
 * surrogate) and the replacement character a garbled encoding leaves behind.
 */
export function textProblem(text: string, what: string, multiline = false): string | null {
  const control = controlCharacter.exec(text) ?? (multiline ? null : lineBreakOrTab.exec(text));
  if (control) {
    const code = control[0].charCodeAt(0).toString(16).toUpperCase().padStart(4, "0");
    return multiline || !lineBreakOrTab.test(control[0])
      ? `Remove the control character (U+${code}) from ${what}.`
      : `Keep ${what} on one line, without tabs or line breaks.`;
  }
  if (loneSurrogate.test(text) || text.includes("\uFFFD"))
    return `${cap(what)} has a character that did not arrive intact; type it again.`;
  return null;
}

/** Adds the text's character problem as the field's issue. */
export const plainCharacters =
  (what: string, multiline = false) =>
  (text: string, ctx: z.RefinementCtx) => {
    const problem = textProblem(text, what, multiline);
    if (problem) ctx.addIssue({ code: "custom", message: problem });
  };

export const requiredText = (what: string, max: number) =>
  z
    .string({ error: `Enter ${what}.` })
    .trim()
    .min(1, `Enter ${what}.`)
    .max(max, `Keep ${what} to ${max} characters.`)
    .superRefine(plainCharacters(what));

export const optionalText = (what: string, max: number) =>
  z.preprocess(
    (v) => (blank(v) ? "" : v),
    z
      .string({ error: `Enter ${what} as text.` })
      .trim()
      .max(max, `Keep ${what} to ${max} characters.`)
      .superRefine(plainCharacters(what)),
  );

/** Text of several lines (notes, comments): tabs and line breaks allowed, other control characters not. */
export const multilineText = (what: string, max: number) =>
  z.preprocess(
    (v) => (blank(v) ? "" : v),
    z
      .string({ error: `Enter ${what} as text.` })
      .trim()
      .max(max, `Keep ${what} to ${max} characters.`)
      .superRefine(plainCharacters(what, true)),
  );

const tagPattern = /^[A-Za-z0-9][A-Za-z0-9 ._/#-]*$/;
export const tagField = (what: string) =>
  requiredText(what, 40).regex(
    tagPattern,
    `Start ${what} with a letter or digit; then use letters, digits, spaces and . _ / # - only.`,
  );

const plainDecimal = /^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/;

/**
 * Reads a number as a person typed it, explaining the usual slips in words: a decimal
 * comma, thousands separators, a unit typed into the box.
 */
export function readDecimal(raw: unknown): { value: number } | { empty: true } | { problem: string } {
  if (typeof raw === "number")
    return Number.isFinite(raw) ? { value: raw } : { problem: "this is not a finite number" };
  if (blank(raw)) return { empty: true };
  if (typeof raw !== "string") return { problem: "this is not a number" };
  const text = raw.trim().replace(/^\+/, "");
  if (/^-?\d+,\d+$/.test(text))
    return { problem: `'${raw.trim()}' uses a decimal comma; write ${text.replace(",", ".")} with a point` };
  if (/^-?\d{1,3}(,\d{3})+(\.\d+)?$/.test(text))
    return {
      problem: `'${raw.trim()}' has a thousands separator; write the number without it, with a point for decimals`,
    };
  if (/^-?[\d.]+\s*[^\d\s.,]+$/.test(text))
    return { problem: `'${raw.trim()}' has a unit in it; type the number only` };
  if (!plainDecimal.test(text)) return { problem: `'${raw.trim().slice(0, 40)}' is not a number` };
  const value = Number(text);
  if (!Number.isFinite(value)) return { problem: `'${raw.trim().slice(0, 40)}' is too large a number` };
  return { value };
}

/** Decimals as written ("12.3400" has 4): what a person claims to have measured. */
function decimalsOf(raw: unknown): number {
  if (typeof raw === "number") {
    const s = String(raw);
    if (/e-/i.test(s)) return Number(s.split(/e-/i)[1]) + (s.split(/e/i)[0].split(".")[1]?.length ?? 0);
    return s.split(".")[1]?.length ?? 0;
  }
  const s = String(raw).trim();
  if (/e/i.test(s)) return decimalsOf(Number(s));
  return s.split(".")[1]?.length ?? 0;
}

export type DecimalRule = {
  /** "the length", "the initial mass": used in messages. */
  what: string;
  unit: string;
  /** Strictly greater than. */
  gt?: number;
  /** At least. */
  min?: number;
  max: number;
  decimals: number;
  /** Why the decimals are limited, said in the message. */
  decimalsWhy?: string;
};

function checkDecimal(raw: unknown, rule: DecimalRule, ctx: z.RefinementCtx): number | undefined {
  const read = readDecimal(raw);
  if ("empty" in read) return undefined;
  if ("problem" in read) {
    ctx.addIssue({ code: "custom", message: `${cap(read.problem)}.` });
    return z.NEVER;
  }
  const v = read.value;
  const unit = rule.unit ? ` ${rule.unit}` : "";
  if (rule.gt !== undefined && !(v > rule.gt)) {
    ctx.addIssue({ code: "custom", message: `${cap(rule.what)} must be more than ${rule.gt}${unit}.` });
    return z.NEVER;
  }
  if (rule.min !== undefined && v < rule.min) {
    ctx.addIssue({ code: "custom", message: `${cap(rule.what)} must be at least ${rule.min}${unit}.` });
    return z.NEVER;
  }
  if (v > rule.max) {
    ctx.addIssue({ code: "custom", message: `${cap(rule.what)} must be at most ${rule.max}${unit}.` });
    return z.NEVER;
  }
  const places = decimalsOf(raw);
  if (places > rule.decimals) {
    ctx.addIssue({
      code: "custom",
      message: `${cap(rule.what)} takes at most ${rule.decimals} decimal${rule.decimals === 1 ? "" : "s"}${
        rule.decimalsWhy ? ` (${rule.decimalsWhy})` : ""
      }; '${String(raw).trim()}' has ${places}.`,
    });
    return z.NEVER;
  }
  return v;
}

export const cap = (s: string) => s.charAt(0).toUpperCase() + s.slice(1);

export const optionalDecimal = (rule: DecimalRule) =>
  z
    .unknown()
    .optional()
    .transform((raw, ctx) => checkDecimal(raw, rule, ctx));
export const requiredDecimal = (rule: DecimalRule) =>
  z
    .unknown()
    .optional()
    .transform((raw, ctx): number => {
      if (blank(raw)) {
        ctx.addIssue({ code: "custom", message: `Enter ${rule.what} in ${rule.unit}.` });
        return z.NEVER;
      }
      return checkDecimal(raw, rule, ctx) as number;
    });

export const wholeNumber = (what: string, unit: string, min: number, max: number, fallback?: number) =>
  z
    .unknown()
    .optional()
    .transform((raw, ctx): number => {
      if (blank(raw)) {
        if (fallback !== undefined) return fallback;
        ctx.addIssue({ code: "custom", message: `Enter ${what} in ${unit}.` });
        return z.NEVER;
      }
      const read = readDecimal(raw);
      if ("problem" in read || "empty" in read) {
        ctx.addIssue({
          code: "custom",
          message: "problem" in read ? `${cap(read.problem)}.` : `Enter ${what} in ${unit}.`,
        });
        return z.NEVER;
      }
      if (!Number.isInteger(read.value) || read.value < min || read.value > max) {
        ctx.addIssue({ code: "custom", message: `${cap(what)} must be a whole number from ${min} to ${max} ${unit}.` });
        return z.NEVER;
      }
      return read.value;
    });

/**
 * A checkbox: forms send a hidden "off" before the box, so an unticked box still
 * says so; a box that was never on the form (code, tests) keeps the default.
 */
export const checkbox = (fallback: boolean) =>
  z
    .unknown()
    .optional()
    .transform((v, ctx) => {
      if (v === undefined || v === null) return fallback;
      if (typeof v === "boolean") return v;
      if (v === "on" || v === "true" || v === "1") return true;
      if (v === "off" || v === "false" || v === "0" || v === "") return false;
      ctx.addIssue({ code: "custom", message: "Tick the box or leave it empty." });
      return z.NEVER;
    });

const isoDatePattern = /^\d{4}-\d{2}-\d{2}$/;
/** A real calendar day written YYYY-MM-DD, years 1900 to 2199. */
export function isCalendarDate(value: string): boolean {
  if (!isoDatePattern.test(value)) return false;
  const year = Number(value.slice(0, 4));
  if (year < 1900 || year > 2199) return false;
  const d = new Date(`${value}T00:00:00Z`);
  return !Number.isNaN(d.getTime()) && d.toISOString().slice(0, 10) === value;
}

/** A calendar day, required, as YYYY-MM-DD. */
export const dateField = (what: string) =>
  z
    .string({ error: `Give ${what} as YYYY-MM-DD.` })
    .trim()
    .min(1, `Give ${what} as YYYY-MM-DD.`)
    .refine(isCalendarDate, `Give ${what} as a real calendar date in the form YYYY-MM-DD, e.g. 2026-03-01.`);

/** A calendar day or nothing ("" when left empty). */
export const optionalDate = (what: string) =>
  z.preprocess((v) => (blank(v) ? "" : v), z.union([z.literal(""), dateField(what)]));

export const idField = (message: string) => z.string({ error: message }).trim().refine(isUuid, message);

/**
 * The record version a form sent (hidden field `version`, for compare-and-set), or
 * undefined when the caller sent none (scripts, the seed); anything else is refused.
 */
export function sentVersion(input: unknown): number | undefined {
  const raw = (input as { version?: unknown } | null)?.version;
  if (raw === undefined) return undefined;
  const n = typeof raw === "string" && /^\d{1,9}$/.test(raw) ? Number(raw) : typeof raw === "number" ? raw : NaN;
  if (!Number.isInteger(n) || n < 0)
    throw new Invalid({ form: "The page sent no valid version; reload it and try again." });
  return n;
}
