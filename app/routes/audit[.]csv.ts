import { auditFilterFrom, auditToCsv, listAudit } from "~/models/audit.server";
import { db } from "~/services/db.server";
import { requireOwnerUser } from "~/services/guards.server";
import { consumeLimit } from "~/services/rate-limit.server";
import { resourceCheck } from "~/services/respond.server";
import type { Route } from "./+types/audit[.]csv";

/** The audit trail as a CSV download, with the same permission and filters as /audit. */
export async function loader(args: Route.LoaderArgs) {
  const user = requireOwnerUser(args, "readAudit");
  const refused = await resourceCheck(() => consumeLimit("auditExportPerUser", user.id));
  if (refused) return refused;
  const { recordType, recordId } = auditFilterFrom(new URL(args.request.url));
  const rows = await listAudit(db(), user.ownerId, { recordType, recordId, limit: 10_000 });
  const stamp = new Date().toISOString().slice(0, 10);
  const suffix = recordType || recordId ? "-filtered" : "";
  return new Response(auditToCsv(rows), {
    headers: {
      "Content-Type": "text/csv; charset=utf-8",
      "Content-Disposition": `attachment; filename="wallcast-audit-${stamp}${suffix}.csv"`,
      "Cache-Control": "no-store",
    },
  });
}
