import { z } from "zod";
import { parseFeedCursor, resultFeed } from "~/models/result-feed.server";
import { apiProblem, json, methodNotAllowed, requireApiCaller } from "~/services/api.server";
import { db } from "~/services/db.server";
import { apiCall } from "~/services/respond.server";
import type { Route } from "./+types/api.v1.results";

const limitWords = "limit must be a whole number from 1 to 1000";
const query = z.strictObject(
  {
    // digits only: Number() would also read "0x10", "1e2" and " "
    limit: z
      .string()
      .regex(/^\d{1,4}$/, limitWords)
      .transform(Number)
      .pipe(z.number().min(1, limitWords).max(1000, limitWords))
      .default(200),
    cursor: z.string().optional(),
    kind: z.enum(["coupon", "thickness"], { error: "kind must be coupon or thickness" }).optional(),
  },
  {
    error: (issue) =>
      issue.code === "unrecognized_keys" ? `Unknown query parameter: ${issue.keys.join(", ")}` : undefined,
  },
);

/**
 * GET /api/v1/results?cursor=&limit=&kind= → { items, nextCursor }: approved coupon results and
 * thickness readings as a change feed (each approval, and each supersession by a correction),
 * oldest change first. Keep the nextCursor and ask again with it; a page shorter than `limit`
 * means there is nothing newer yet. Owner staff by session; `results:read` for a token.
 */
export async function loader(args: Route.LoaderArgs) {
  const caller = await requireApiCaller(args, "results:read");
  if (caller.organisation.kind !== "owner")
    return apiProblem(args, 404, "There is nothing here for your organisation.");
  const parsed = query.safeParse(Object.fromEntries(new URL(args.request.url).searchParams));
  if (!parsed.success) {
    const issue = parsed.error.issues[0];
    return apiProblem(args, 400, issue?.message ?? "Invalid query.", { field: issue?.path.join(".") || "query" });
  }
  const { limit, cursor, kind } = parsed.data;
  const after = cursor === undefined ? undefined : parseFeedCursor(cursor);
  if (after === null) return apiProblem(args, 400, "cursor is not one this endpoint handed out.", { field: "cursor" });
  return apiCall(args, async () =>
    json(await resultFeed(db(), caller.ownerId, { limit, ...(after ? { after } : {}), ...(kind ? { kind } : {}) })),
  );
}

export function action(args: Route.ActionArgs) {
  return methodNotAllowed(args, "GET");
}
