import { couponCsvTemplate } from "~/models/coupon-import.server";
import { requireOwnerUser } from "~/services/guards.server";
import type { Route } from "./+types/setup.coupons[.]csv";

/**
 * The coupon import template: our own column names with their units, and three
 * example lines (a strip, a disc with a stated density, a flush disc) that import as
 * they stand. Delete the examples before filling in your own coupons.
 */
export function loader(args: Route.LoaderArgs) {
  requireOwnerUser(args, "setUpSites");
  return new Response(couponCsvTemplate(), {
    headers: {
      "Content-Type": "text/csv; charset=utf-8",
      "Content-Disposition": 'attachment; filename="wallcast-coupons-template.csv"',
      "Cache-Control": "no-store",
    },
  });
}
