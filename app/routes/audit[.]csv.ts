import { auditCsvStream, auditFilterFrom } from "~/models/audit.server";
import { db } from "~/services/db.server";
import { requireOwnerUser } from "~/services/guards.server";
import { consumeLimit } from "~/services/rate-limit.server";
import { resourceCheck } from "~/services/respond.server";
import type { Route } from "./+types/audit[.]csv";

/**
 * The audit trail as a CSV download, with the same permission and filters as /audit:
 * every event that matches, streamed in batches (no cap).
 */
export async function loader(args: Route.LoaderArgs) {
  const user = requireOwnerUser(args, "readAudit");
  const refused = await resourceCheck(() => consumeLimit("auditExportPerUser", user.id));
  if (refused) return refused;
  const filter = auditFilterFrom(new URL(args.request.url));
  const stamp = new Date().toISOString().slice(0, 10);
  const suffix = filter.recordType || filter.recordId ? "-filtered" : "";
  return new Response(auditCsvStream(db(), user.ownerId, filter), {
    headers: {
      "Content-Type": "text/csv; charset=utf-8",
      "Content-Disposition": `attachment; filename="wallcast-audit-${stamp}${suffix}.csv"`,
      "Cache-Control": "no-store",
    },
  });
}
