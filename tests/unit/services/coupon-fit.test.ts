import { describe, expect, it } from "vitest";
import { COUPON_SHAPES } from "../../../app/domain/index.ts";
import {
  MOUNTINGS,
  SHAPES_FOR_MOUNTING,
  fitsMounting,
  misfitMessage,
  mountingTakes,
} from "../../../app/services/coupon-fit";

describe("which coupon shapes fit a point's mounting", () => {
  it("takes only flush discs in a flush mounting (common practice: the face sits level with the wall)", () => {
    expect(fitsMounting("flush", "flush-disc")).toBe(true);
    expect(fitsMounting("flush", "strip")).toBe(false);
    expect(fitsMounting("flush", "disc")).toBe(false);
    expect(fitsMounting("flush", "rod")).toBe(false);
  });

  it("takes strips, discs and rods, never a flush disc, in an intrusive mounting (common practice)", () => {
    expect(fitsMounting("intrusive", "strip")).toBe(true);
    expect(fitsMounting("intrusive", "disc")).toBe(true);
    expect(fitsMounting("intrusive", "rod")).toBe(true);
    expect(fitsMounting("intrusive", "flush-disc")).toBe(false);
  });

  it("gives every shape a mounting, and fits nothing to a mounting it does not know", () => {
    const placed = MOUNTINGS.flatMap((m) => SHAPES_FOR_MOUNTING[m]);
    expect([...placed].sort()).toEqual([...COUPON_SHAPES].sort());
    expect(fitsMounting("glued", "strip")).toBe(false);
  });

  it("says in words what a mounting takes and why a coupon does not fit", () => {
    expect(mountingTakes("flush")).toBe("A flush-mounted point takes flush disc coupons only.");
    expect(mountingTakes("intrusive")).toBe("An intrusive mounting takes strip, disc or rod coupons.");
    expect(misfitMessage("S-1", "strip", "flush")).toBe(
      "Coupon S-1 is a strip; it does not fit this point. A flush-mounted point takes flush disc coupons only.",
    );
  });
});
