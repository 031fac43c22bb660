import { z } from "zod";
import { listSubmissions, parseSubmissionCursor, type SubmissionCursor } from "~/models/submissions.server";
import { apiProblem, json, methodNotAllowed, requireApiCaller } from "~/services/api.server";
import { db } from "~/services/db.server";
import { isUuid } from "~/services/guards.server";
import type { Route } from "./+types/api.v1.submissions";

const query = z.object({
  // digits only: Number() would also read "0x10", "1e2" and " "
  limit: z
    .string()
    .regex(/^\d{1,3}$/, "limit must be a whole number from 1 to 200")
    .transform(Number)
    .pipe(
      z
        .number()
        .min(1, "limit must be a whole number from 1 to 200")
        .max(200, "limit must be a whole number from 1 to 200"),
    )
    .default(50),
  cursor: z.string().optional(),
  site: z.string().optional(),
  status: z
    .enum(["draft", "submitted", "returned", "approved", "superseded"], {
      error: "status must be one of draft, submitted, returned, approved, superseded",
    })
    .optional(),
  kind: z.enum(["coupon", "thickness"], { error: "kind must be coupon or thickness" }).optional(),
  contractor: z.string().optional(),
  worstSeverity: z
    .enum(["low", "moderate", "high", "severe"], { error: "worstSeverity must be one of low, moderate, high, severe" })
    .optional(),
  flagged: z.enum(["true", "false"], { error: "flagged must be true or false" }).optional(),
  order: z.enum(["newest", "oldest"], { error: "order must be newest or oldest" }).optional(),
});

function decodeCursor(cursor: string): SubmissionCursor | null {
  if (!/^[A-Za-z0-9_-]{1,200}$/.test(cursor)) return null;
  return parseSubmissionCursor(Buffer.from(cursor, "base64url").toString("utf8"));
}

// GET /api/v1/submissions?limit=&cursor=&site=&status=&kind=&contractor=&worstSeverity=&flagged=&order= → { items, nextCursor }
export async function loader(args: Route.LoaderArgs) {
  const user = (await requireApiCaller(args, "results:read")).reader;
  const parsed = query.safeParse(Object.fromEntries(new URL(args.request.url).searchParams));
  if (!parsed.success) {
    const issue = parsed.error.issues[0];
    return apiProblem(args, 400, issue?.message ?? "Invalid query.", { field: issue?.path.join(".") });
  }
  const { limit, cursor, site, status, kind, contractor, worstSeverity, flagged, order } = parsed.data;
  if (site !== undefined && !isUuid(site))
    return apiProblem(args, 400, "site must be a site id (uuid).", { field: "site" });
  if (contractor !== undefined && !isUuid(contractor))
    return apiProblem(args, 400, "contractor must be an organisation id (uuid).", { field: "contractor" });
  const decoded = cursor ? decodeCursor(cursor) : undefined;
  if (cursor && !decoded)
    return apiProblem(args, 400, "cursor is not one this endpoint handed out.", { field: "cursor" });
  const page = await listSubmissions(
    db(),
    user,
    {
      siteId: site,
      status,
      kind,
      contractorId: contractor,
      worstSeverity,
      flagged: flagged === undefined ? undefined : flagged === "true",
      order,
    },
    { limit, cursor: decoded ?? undefined },
  );
  return json({
    items: page.items,
    nextCursor: page.nextCursor ? Buffer.from(page.nextCursor, "utf8").toString("base64url") : null,
  });
}

export function action(args: Route.ActionArgs) {
  return methodNotAllowed(args, "GET");
}
