import { checkDb } from "~/services/db.server";
import { checkStorage } from "~/services/storage.server";

type Part = "ok" | "down";
const lastReason: Record<"db" | "storage", string> = { db: "ok", storage: "ok" };

/** The reason stays in the server's log (once per change), never in the anonymous answer. */
function partState(name: "db" | "storage", result: string): Part {
  if (result !== lastReason[name]) {
    console.warn(result === "ok" ? `healthz: ${name} answers again` : `healthz: ${name} ${result}`);
    lastReason[name] = result;
  }
  return result === "ok" ? "ok" : "down";
}

/**
 * Readiness, for the load balancer and anyone else (no sign-in): which dependency is
 * down, never why (no error text, host names or stacks).
 *
 *   200 { status: "ok",       db: "ok",   storage: "ok" }
 *   200 { status: "degraded", db: "ok",   storage: "down" }  pages still serve; uploads and photos wait
 *   503 { status: "down",     db: "down", storage: … }       nothing can be served: take this process out
 */
export async function loader() {
  const [dbResult, storageResult] = await Promise.all([checkDb(), checkStorage()]);
  const db = partState("db", dbResult);
  const storage = partState("storage", storageResult);
  const status = db === "down" ? "down" : storage === "down" ? "degraded" : "ok";
  return Response.json(
    { status, db, storage },
    { status: db === "down" ? 503 : 200, headers: { "Cache-Control": "no-store" } },
  );
}
