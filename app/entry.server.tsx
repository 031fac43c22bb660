import { PassThrough } from "node:stream";
import { createReadableStreamFromReadable } from "@react-router/node";
import { isbot } from "isbot";
import type { RenderToPipeableStreamOptions } from "react-dom/server";
import { renderToPipeableStream } from "react-dom/server";
import type { EntryContext, HandleErrorFunction, RouterContextProvider } from "react-router";
import { isRouteErrorResponse, ServerRouter } from "react-router";
import { requestInfoContext } from "./context";
import { closeDb, isDatabaseUnavailable } from "./services/db.server";
import { noteOutage } from "./services/respond.server";
import { startBackgroundJobs, stopBackgroundJobs } from "./jobs/queue.server";
import { closeStorage } from "./services/storage.server";

// server.ts takes the context key from the bundle so both sides share one instance.
export { requestInfoContext };

// server.ts starts the job queue (e-mail delivery, reminders) once the server listens.
export { startBackgroundJobs };

export const streamTimeout = 5_000;

/**
 * Every error a loader, action or render threw (React Router calls this before it
 * renders the error boundary). A database outage is noted on the request, so the
 * `databaseOutage` middleware answers 503 instead of 500, and logged in one line;
 * anything else is logged whole (outside tests), as React Router does by default.
 */
export const handleError: HandleErrorFunction = (error, { request, context }) => {
  if (request.signal.aborted) return;
  if (isDatabaseUnavailable(error)) {
    noteOutage(context, error);
    return;
  }
  if (process.env.NODE_ENV === "test") return; // as React Router's default: tests read errors from responses
  // A route error response may carry the error that caused it (React Router's own field).
  const cause = isRouteErrorResponse(error) ? (error as { error?: unknown }).error : undefined;
  console.error(cause ?? error);
};

export default function handleRequest(
  request: Request,
  responseStatusCode: number,
  responseHeaders: Headers,
  routerContext: EntryContext,
  loadContext: RouterContextProvider,
) {
  // The nonce comes from server.ts, which also writes it into the CSP header.
  const { nonce } = loadContext.get(requestInfoContext);
  return new Promise<Response>((resolve, reject) => {
    let shellRendered = false;
    const userAgent = request.headers.get("user-agent");
    // Bots and printing wait for the whole document; browsers stream.
    const readyOption: keyof RenderToPipeableStreamOptions =
      (userAgent && isbot(userAgent)) || routerContext.isSpaMode ? "onAllReady" : "onShellReady";

    let timeoutId: ReturnType<typeof setTimeout> | undefined = setTimeout(() => abort(), streamTimeout + 1000);

    const { pipe, abort } = renderToPipeableStream(
      <ServerRouter context={routerContext} url={request.url} nonce={nonce} />,
      {
        nonce,
        [readyOption]() {
          shellRendered = true;
          const body = new PassThrough({
            final(callback) {
              clearTimeout(timeoutId);
              timeoutId = undefined;
              callback();
            },
          });
          const stream = createReadableStreamFromReadable(body);
          responseHeaders.set("Content-Type", "text/html; charset=utf-8");
          pipe(body);
          resolve(new Response(stream, { headers: responseHeaders, status: responseStatusCode }));
        },
        onShellError(error: unknown) {
          reject(error);
        },
        onError(error: unknown) {
          responseStatusCode = 500;
          if (shellRendered) console.error(error);
        },
      },
    );
  });
}

/**
 * Called by server.ts on SIGTERM/SIGINT after the HTTP server stops accepting
 * requests: closes what this bundle opened (database pool, object-store client, queue).
 */
export async function shutdown(): Promise<void> {
  await stopBackgroundJobs();
  closeStorage();
  await closeDb();
}
