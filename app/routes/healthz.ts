import { checkDb } from "~/services/db.server";
import { checkStorage } from "~/services/storage.server";

// Liveness and readiness in one: 200 when the database and the object store answer,
// 503 naming the part that does not.
export async function loader() {
  const [dbState, storage] = await Promise.all([checkDb(), checkStorage()]);
  const ok = dbState === "ok" && storage === "ok";
  return Response.json(
    { status: ok ? "ok" : "degraded", db: dbState, storage },
    { status: ok ? 200 : 503, headers: { "Cache-Control": "no-store" } },
  );
}
