import { cmlCsvTemplate } from "~/models/design-import.server";
import { requireOwnerUser } from "~/services/guards.server";
import type { Route } from "./+types/setup.cml-template[.]csv";

/** The CML import template: our own column names and two example lines. */
export function loader(args: Route.LoaderArgs) {
  requireOwnerUser(args, "setUpSites");
  return new Response(cmlCsvTemplate(), {
    headers: {
      "Content-Type": "text/csv; charset=utf-8",
      "Content-Disposition": 'attachment; filename="wallcast-cml-template.csv"',
      "Cache-Control": "no-store",
    },
  });
}
