import { designCsvTemplate } from "~/models/design-import.server";
import { requireOwnerUser } from "~/services/guards.server";
import type { Route } from "./+types/setup.circuit-design-template[.]csv";

/**
 * The circuit design import template: our own column names with their units, and two example
 * lines (diameter and wall from the NPS and schedule; an owner's structural minimum). Replace
 * the examples with your own circuits.
 */
export function loader(args: Route.LoaderArgs) {
  requireOwnerUser(args, "setUpSites");
  return new Response(designCsvTemplate(), {
    headers: {
      "Content-Type": "text/csv; charset=utf-8",
      "Content-Disposition": 'attachment; filename="wallcast-circuit-design-template.csv"',
      "Cache-Control": "no-store",
    },
  });
}
