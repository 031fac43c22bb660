import { z } from "zod";
import { apiPoints } from "~/models/api-directory.server";
import { apiProblem, json, methodNotAllowed, requireApiCaller } from "~/services/api.server";
import { db } from "~/services/db.server";
import { isUuid } from "~/services/guards.server";
import { apiCall } from "~/services/respond.server";
import type { Route } from "./+types/api.v1.points";

const limitWords = "limit must be a whole number from 1 to 1000";
const query = z.strictObject(
  {
    // digits only: Number() would also read "0x10", "1e2" and " "
    limit: z
      .string()
      .regex(/^\d{1,4}$/, limitWords)
      .transform(Number)
      .pipe(z.number().min(1, limitWords).max(1000, limitWords))
      .default(500),
    cursor: z.string().min(1, "cursor is not one this endpoint handed out").max(200).optional(),
    siteId: z.string().refine(isUuid, "siteId must be a site id (uuid)").optional(),
    kind: z
      .string()
      .regex(/^[a-z]{1,20}$/, "kind must be a point kind such as coupon")
      .optional(),
  },
  {
    error: (issue) =>
      issue.code === "unrecognized_keys" ? `Unknown query parameter: ${issue.keys.join(", ")}` : undefined,
  },
);

// GET /api/v1/points?siteId=&kind=&cursor=&limit= → { items: [{ id, tag, kind, site, circuit, unitTag }], nextCursor }
export async function loader(args: Route.LoaderArgs) {
  const caller = await requireApiCaller(args, "any");
  if (caller.organisation.kind !== "owner")
    return apiProblem(args, 404, "There is nothing here for your organisation.");
  const parsed = query.safeParse(Object.fromEntries(new URL(args.request.url).searchParams));
  if (!parsed.success) {
    const issue = parsed.error.issues[0];
    return apiProblem(args, 400, issue?.message ?? "Invalid query.", { field: issue?.path.join(".") || "query" });
  }
  const { limit, cursor, siteId, kind } = parsed.data;
  return apiCall(args, async () => {
    const page = await apiPoints(db(), caller.ownerId, {
      limit,
      ...(siteId ? { siteId: siteId.toLowerCase() } : {}),
      ...(kind ? { kind } : {}),
      ...(cursor ? { afterTag: Buffer.from(cursor, "base64url").toString("utf8") } : {}),
    });
    return json({
      items: page.items,
      nextCursor: page.nextCursor === null ? null : Buffer.from(page.nextCursor, "utf8").toString("base64url"),
    });
  });
}

export function action(args: Route.ActionArgs) {
  return methodNotAllowed(args, "GET");
}
