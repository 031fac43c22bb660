/** Listening, closing and request logging shared by the local services. */
import type { Server } from "node:http";

export function listen(server: Server, port: number, host: string): Promise<void> {
  return new Promise((resolve, reject) => {
    const onError = (err: Error) => {
      server.off("listening", onListening);
      reject(err);
    };
    const onListening = () => {
      server.off("error", onError);
      resolve();
    };
    server.once("error", onError);
    server.once("listening", onListening);
    server.listen(port, host);
  });
}

export function closeServer(server: Server): Promise<void> {
  return new Promise((resolve, reject) => {
    if (!server.listening) {
      resolve();
      return;
    }
    server.close((err) => (err ? reject(err) : resolve()));
    // Keep-alive connections would otherwise hold close() open for seconds.
    server.closeAllConnections();
  });
}

/** Logs one short line per finished request: `[label] METHOD /path STATUS 12ms` (no query string). */
export function logRequests(server: Server, label: string, log: (line: string) => void): void {
  server.on("request", (req, res) => {
    const started = process.hrtime.bigint();
    const path = (req.url ?? "/").split("?")[0];
    res.once("finish", () => {
      const ms = Number((process.hrtime.bigint() - started) / 1_000_000n);
      log(`[${label}] ${req.method ?? "?"} ${path} ${res.statusCode} ${ms}ms`);
    });
  });
}

export function hostForUrl(host: string): string {
  return host.includes(":") ? `[${host}]` : host;
}
