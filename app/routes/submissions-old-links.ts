import { redirect } from "react-router";
import type { Route } from "./+types/submissions-old-links";

// Links in e-mails sent before submissions had one name pointed at /packets/…; they keep working.
export function loader({ params }: Route.LoaderArgs) {
  const rest = params["*"] ?? "";
  throw redirect(rest ? `/submissions/${encodeURIComponent(rest.split("/")[0])}` : "/submissions", 301);
}
