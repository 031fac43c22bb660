import { CAUTION } from "~/services/caution";
import { z } from "zod";
import { circuitLifePage, isOwnCircuit } from "~/models/circuit-life.server";
import { apiProblem, json, methodNotAllowed, requireApiCaller } from "~/services/api.server";
import { db } from "~/services/db.server";
import { isUuid } from "~/services/guards.server";
import { apiCall } from "~/services/respond.server";
import type { Route } from "./+types/api.v1.circuits";

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
  siteId: z.string().optional(),
});

// GET /api/v1/circuits?siteId=&cursor=&limit= → { items: [the current remaining life of each circuit], nextCursor }
export async function loader(args: Route.LoaderArgs) {
  const user = (await requireApiCaller(args, "outlook:read")).reader;
  const parsed = query.safeParse(Object.fromEntries(new URL(args.request.url).searchParams));
  if (!parsed.success) {
    const issue = parsed.error.issues[0];
    return apiProblem(args, 400, issue?.message ?? "Invalid query.", { field: issue?.path.join(".") });
  }
  const { limit, cursor, siteId } = parsed.data;
  if (siteId !== undefined && !isUuid(siteId))
    return apiProblem(args, 400, "siteId must be a site id (uuid).", { field: "siteId" });
  if (cursor !== undefined && !isUuid(cursor))
    return apiProblem(args, 400, "cursor is not one this endpoint handed out.", { field: "cursor" });
  return apiCall(args, async () => {
    if (cursor !== undefined && !(await isOwnCircuit(db(), user, cursor)))
      return apiProblem(args, 400, "cursor is not one this endpoint handed out.", { field: "cursor" });
    const page = await circuitLifePage(db(), user, {
      limit,
      ...(siteId ? { siteId: siteId.toLowerCase() } : {}),
      ...(cursor ? { cursor: cursor.toLowerCase() } : {}),
    });
    return json({ ...page, caution: CAUTION });
  });
}

export function action(args: Route.ActionArgs) {
  return methodNotAllowed(args, "GET");
}
