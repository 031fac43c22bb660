import type { CouponShape } from "./coupon-spec";

/**
 * Which coupon shapes a monitoring point's mounting takes: the one fit table, shared by
 * the exchange form (which offers only coupons that fit), the server (which refuses one
 * that does not) and the set-up screens. Pure, so the browser reads the same table.
 *
 * Common practice: a flush-mounted holder sets one face of a flush disc level with the
 * pipe wall; strips, discs on a holder and rods stand in the flow and need an intrusive
 * (into the flow) mounting.
 */

export const MOUNTINGS = ["flush", "intrusive"] as const;
export type Mounting = (typeof MOUNTINGS)[number];

export const SHAPES_FOR_MOUNTING: Readonly<Record<Mounting, readonly CouponShape[]>> = {
  flush: ["flush-disc"],
  intrusive: ["strip", "disc", "rod"],
};

/** Shapes as people say them. */
export const SHAPE_NAMES: Readonly<Record<CouponShape, string>> = {
  strip: "strip",
  disc: "disc",
  rod: "rod",
  "flush-disc": "flush disc",
};

/** Mountings as people say them. */
export const MOUNTING_NAMES: Readonly<Record<Mounting, string>> = {
  flush: "flush (level with the pipe wall)",
  intrusive: "intrusive (into the flow)",
};

const isMounting = (m: string): m is Mounting => (MOUNTINGS as readonly string[]).includes(m);

/** Whether a coupon of this shape can go in a point of this mounting. */
export function fitsMounting(mounting: string, shape: string): boolean {
  return isMounting(mounting) && (SHAPES_FOR_MOUNTING[mounting] as readonly string[]).includes(shape);
}

const listWords = (words: string[]) =>
  words.length <= 1 ? (words[0] ?? "") : `${words.slice(0, -1).join(", ")} or ${words[words.length - 1]}`;

/** "A flush-mounted point takes flush disc coupons only." */
export function mountingTakes(mounting: string): string {
  if (!isMounting(mounting)) return `The point's mounting “${mounting}” is not one Wallcast knows.`;
  const shapes = SHAPES_FOR_MOUNTING[mounting].map((s) => SHAPE_NAMES[s]);
  return mounting === "flush"
    ? `A flush-mounted point takes ${listWords(shapes)} coupons only.`
    : `An intrusive mounting takes ${listWords(shapes)} coupons.`;
}

/** Why a coupon does not fit the point, naming both. */
export function misfitMessage(serial: string, shape: string, mounting: string): string {
  const name = SHAPE_NAMES[shape as CouponShape] ?? shape;
  return `Coupon ${serial} is a ${name}; it does not fit this point. ${mountingTakes(mounting)}`;
}
