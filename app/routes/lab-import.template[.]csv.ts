import { labTemplateCsv } from "~/models/lab-import.server";
import { requireCapability } from "~/services/guards.server";
import type { Route } from "./+types/lab-import.template[.]csv";

// The empty template for lab results: our column names, units in the header.
export function loader(args: Route.LoaderArgs) {
  requireCapability(args, "recordWork");
  return new Response(`\uFEFF${labTemplateCsv()}`, {
    headers: {
      "Content-Type": "text/csv; charset=utf-8",
      "Content-Disposition": 'attachment; filename="wallcast-lab-results-template.csv"',
      "Cache-Control": "no-store",
    },
  });
}
