import { surveyTemplateCsv } from "~/models/thickness-surveys.server";
import { db } from "~/services/db.server";
import { requireCapability, requireUuid } from "~/services/guards.server";
import { pageLoad } from "~/services/respond.server";
import type { Route } from "./+types/surveys.$submissionId.template[.]csv";

// The survey's import template: our column names, a row per CML with its tag filled in.
export async function loader(args: Route.LoaderArgs) {
  const user = requireCapability(args, "recordWork");
  const id = requireUuid(args.params.submissionId);
  const csv = await pageLoad(() => surveyTemplateCsv(db(), user, id));
  return new Response(`\uFEFF${csv}`, {
    headers: {
      "Content-Type": "text/csv; charset=utf-8",
      "Content-Disposition": 'attachment; filename="wallcast-survey-readings-template.csv"',
      "Cache-Control": "no-store",
    },
  });
}
