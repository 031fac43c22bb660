/**
 * Wallcast's HTTP entry: Express in front of React Router (the request body limited while it streams).
 *
 *   node --import tsx server.ts             serve build/ against the configured services (production)
 *   node --import tsx server.ts --local     `npm start`: start the local stack (own PostgreSQL, fake
 *                                           IdP / S3 / mail), migrate, seed an empty database, build, serve
 *   node --import tsx server.ts --local --dev   `npm run dev`: the same with the Vite dev server
 *
 * Tests import `createApp` and drive it in-process with supertest.
 */
import { spawnSync } from "node:child_process";
import { randomBytes, randomUUID } from "node:crypto";
import { closeSync, existsSync, openSync, readFileSync, rmSync, writeFileSync } from "node:fs";
import type { AddressInfo } from "node:net";
import path from "node:path";
import { fileURLToPath, pathToFileURL } from "node:url";
import { writeReadableStreamToWritable } from "@react-router/node";
import compression from "compression";
import express, { type Express, type NextFunction, type Request, type Response } from "express";
import { createRequestHandler, RouterContextProvider, type ServerBuild } from "react-router";
import type { RequestInfo } from "./app/context";
import { assertProductionSettings, parseEnv } from "./app/services/env.server";
import { bodyLimitFor, type BodyLimit, type BodyRefusal } from "./app/services/body-limits";

const root = path.dirname(fileURLToPath(import.meta.url));

export type AppOptions = {
  build: ServerBuild | (() => Promise<ServerBuild>);
  /** Vite's dev server in `npm run dev`; its middleware serves modules and HMR. */
  viteDevServer?: { middlewares: express.RequestHandler; ssrLoadModule(id: string): Promise<unknown> };
  logRequests?: boolean;
  /** Origins that forms may post to after a redirect (the identity provider). */
  formActionOrigins?: string[];
  /** Origins images may come from (the object store, for presigned URLs). */
  imageOrigins?: string[];
  log?: (line: string) => void;
  /** Express `trust proxy` (default: TRUST_PROXY from the environment, off unless set). */
  trustProxy?: false | number | string;
  /** Send Strict-Transport-Security (default: when APP_ORIGIN is https). */
  hsts?: boolean;
};

function originOf(url: string | undefined): string | undefined {
  if (!url) return undefined;
  try {
    return new URL(url).origin;
  } catch {
    return undefined;
  }
}

function securityHeaders(options: AppOptions) {
  const formAction = ["'self'", ...(options.formActionOrigins ?? [])].join(" ");
  const images = ["'self'", "data:", "blob:", ...(options.imageOrigins ?? [])].join(" ");
  const dev = Boolean(options.viteDevServer);
  return (req: Request, res: Response, next: NextFunction) => {
    const nonce = randomBytes(16).toString("base64");
    res.locals.nonce = nonce;
    const scriptSrc = dev ? `'self' 'unsafe-inline' 'unsafe-eval'` : `'self' 'nonce-${nonce}' 'strict-dynamic'`;
    res.setHeader(
      "Content-Security-Policy",
      [
        "default-src 'self'",
        `script-src ${scriptSrc}`,
        // Charts and react-pdf previews set inline styles.
        "style-src 'self' 'unsafe-inline'",
        `img-src ${images}`,
        "font-src 'self'",
        dev ? "connect-src 'self' ws: wss:" : "connect-src 'self'",
        "object-src 'none'",
        "base-uri 'self'",
        `form-action ${formAction}`,
        "frame-ancestors 'none'",
      ].join("; "),
    );
    res.setHeader("X-Content-Type-Options", "nosniff");
    res.setHeader("Referrer-Policy", "strict-origin-when-cross-origin");
    res.setHeader("X-Frame-Options", "DENY");
    res.setHeader("Cross-Origin-Opener-Policy", "same-origin");
    res.setHeader("Permissions-Policy", "camera=(), microphone=(), geolocation=()");
    if (options.hsts) res.setHeader("Strict-Transport-Security", "max-age=63072000; includeSubDomains");
    next();
  };
}

function requestLogging(options: AppOptions) {
  const log = options.log ?? ((line: string) => console.log(line));
  return (req: Request, res: Response, next: NextFunction) => {
    const given = req.get("x-request-id");
    const requestId = given && /^[A-Za-z0-9._-]{8,100}$/.test(given) ? given : randomUUID();
    res.locals.requestId = requestId;
    res.setHeader("X-Request-Id", requestId);
    const started = process.hrtime.bigint();
    if (options.logRequests !== false) {
      res.on("finish", () => {
        const ms = Number(process.hrtime.bigint() - started) / 1e6;
        log(
          `${new Date().toISOString()} ${requestId} ${req.method} ${req.originalUrl} ${res.statusCode} ${ms.toFixed(1)}ms`,
        );
      });
    }
    next();
  };
}

// ---------------------------------------------------------------------------
// Request bodies: one limits table (app/services/body-limits.ts), enforced here for every route

/** Whether the request says it has a body (a length above 0, or chunked). */
function announcesBody(req: Request): boolean {
  return req.headers["transfer-encoding"] !== undefined || Number(req.headers["content-length"] ?? 0) > 0;
}

const refusalOf = (limit: BodyLimit): BodyRefusal => ({ status: 413, answer: limit.answer, message: limit.message });

/**
 * Looks up the body limit of every request and refuses at once a declared length above
 * it, or any body on GET/HEAD, without reading a byte. Bodies within the declared limit
 * (or chunked) are counted while they stream, by `limitedBody` in the React Router handler.
 */
function bodyLimits() {
  return (req: Request, res: Response, next: NextFunction) => {
    const limit = bodyLimitFor(req.method, req.path);
    res.locals.bodyLimit = limit;
    const declared = Number(req.headers["content-length"] ?? 0);
    if (announcesBody(req) && (limit.bytes === 0 || declared > limit.bytes)) res.locals.bodyRefusal = refusalOf(limit);
    next();
  };
}

/**
 * The request body as a web stream that errors, and calls `onRefused` once, as soon as
 * more than `limit` bytes have arrived. It pulls from the request (backpressure), so an
 * unread body stays in the socket; once refused, nothing more is read.
 */
function limitedBody(req: Request, limit: BodyLimit, onRefused: () => void): ReadableStream<Uint8Array> {
  let received = 0;
  let done = false;
  const stop = () => {
    done = true;
    req.pause();
    req.removeListener("data", onData);
  };
  let controller!: ReadableStreamDefaultController<Uint8Array>;
  const onData = (chunk: Buffer) => {
    if (done) return;
    received += chunk.byteLength;
    if (received > limit.bytes) {
      stop();
      onRefused(); // first, so the route's work is already aborted when its read fails
      controller.error(new Error(`the request body exceeded ${limit.bytes} bytes (${limit.name})`));
      return;
    }
    controller.enqueue(new Uint8Array(chunk.buffer, chunk.byteOffset, chunk.byteLength));
    if ((controller.desiredSize ?? 0) <= 0) req.pause();
  };
  return new ReadableStream<Uint8Array>(
    {
      start(c) {
        controller = c;
        req.pause();
        req.on("data", onData);
        req.once("end", () => {
          if (done) return;
          done = true;
          controller.close();
        });
        req.once("error", (error) => {
          if (done) return;
          stop();
          controller.error(error);
        });
      },
      pull() {
        if (!done) req.resume();
      },
      cancel() {
        stop();
      },
    },
    { highWaterMark: 64 * 1024, size: (chunk) => chunk.byteLength },
  );
}

function webHeaders(req: Request): Headers {
  const headers = new Headers();
  for (const [key, value] of Object.entries(req.headers)) {
    if (Array.isArray(value)) for (const v of value) headers.append(key, v);
    else if (value !== undefined) headers.set(key, value);
  }
  return headers;
}

function webUrl(req: Request): string {
  // Host as the client named it (the proxy's X-Forwarded-Host when trusted), cut at any character
  // that would end a host in a URL, as @react-router/express did.
  const forwarded = req.app.enabled("trust proxy") ? req.get("X-Forwarded-Host")?.split(",")[0].trim() : undefined;
  const host = (forwarded || req.get("host") || "").split(/[\\/?#@]/)[0] || "localhost";
  return new URL(`${req.protocol}://${host}${req.originalUrl}`).href;
}

/**
 * React Router behind Express, with the body limit applied while the body streams. A body
 * that turns out too large aborts the route's work (its reads fail; an aborted request is
 * not logged as an error) and the request is answered again without its body, so the app's
 * root answers the refusal: problem+json or the error page, 413, `Connection: close`.
 */
function routerHandler(options: AppOptions) {
  const handleRequest = createRequestHandler(options.build, process.env.NODE_ENV);
  const contextFor = async (req: Request, res: Response, bodyRefusal: BodyRefusal | null) => {
    // The context key must be the bundle's own instance, so it comes from the build.
    const build = typeof options.build === "function" ? await options.build() : options.build;
    const { requestInfoContext } = build.entry.module as unknown as {
      requestInfoContext: import("react-router").RouterContext<RequestInfo>;
    };
    const context = new RouterContextProvider();
    context.set(requestInfoContext, {
      requestId: res.locals.requestId,
      nonce: res.locals.nonce,
      clientIp: req.ip ?? req.socket.remoteAddress ?? "unknown",
      bodyRefusal,
    });
    return context;
  };

  return async (req: Request, res: Response, next: NextFunction) => {
    try {
      const url = webUrl(req);
      const aborted = new AbortController();
      res.on("close", () => {
        if (!res.writableFinished) aborted.abort();
      });
      const bodiless = () => new Request(url, { method: req.method, headers: webHeaders(req), signal: aborted.signal });

      let refusal: BodyRefusal | null = res.locals.bodyRefusal ?? null;
      let response: globalThis.Response | null = null;
      if (!refusal && announcesBody(req)) {
        const limit = res.locals.bodyLimit as BodyLimit;
        const work = new AbortController();
        let refused!: () => void;
        const tooLarge = new Promise<"refused">((resolve) => {
          refused = () => {
            work.abort();
            resolve("refused");
          };
        });
        const request = new Request(url, {
          method: req.method,
          headers: webHeaders(req),
          body: limitedBody(req, limit, refused),
          duplex: "half",
          signal: AbortSignal.any([aborted.signal, work.signal]),
        } as RequestInit);
        const answered = handleRequest(request, await contextFor(req, res, null));
        const first = await Promise.race([answered, tooLarge]);
        if (first === "refused") {
          // The route's own answer (an error about its failed read) is dropped.
          answered.then((r) => r.body?.cancel()).catch(() => undefined);
          refusal = refusalOf(limit);
        } else response = first;
      }
      if (refusal) response = await handleRequest(bodiless(), await contextFor(req, res, refusal));
      else response ??= await handleRequest(bodiless(), await contextFor(req, res, null));
      await sendResponse(req, res, response);
    } catch (error) {
      next(error);
    }
  };
}

/**
 * Writes React Router's response. When the request body was not read to its end (refused,
 * or answered without reading it), the connection closes after the response, so Node does
 * not read and discard the rest of the body to reuse the connection.
 */
async function sendResponse(req: Request, res: Response, response: globalThis.Response): Promise<void> {
  if (res.destroyed || res.writableEnded) {
    await response.body?.cancel();
    return;
  }
  res.statusMessage = response.statusText;
  res.status(response.status);
  for (const [key, value] of response.headers.entries()) res.append(key, value);
  // Node ends the connection after a response that says `Connection: close`.
  if (announcesBody(req) && !req.complete) res.setHeader("Connection", "close");
  if (response.headers.get("Content-Type")?.match(/text\/event-stream/i)) res.flushHeaders();
  if (!response.body) {
    res.end();
    return;
  }
  try {
    await writeReadableStreamToWritable(response.body, res);
  } catch (error) {
    if (res.destroyed || res.writableEnded) return;
    throw error;
  }
}

export function createApp(given: AppOptions): Express {
  const settings = given.trustProxy === undefined || given.hsts === undefined ? parseEnv() : undefined;
  const options: AppOptions = {
    ...given,
    trustProxy: given.trustProxy ?? settings?.TRUST_PROXY ?? false,
    hsts: given.hsts ?? settings?.APP_ORIGIN.startsWith("https://") ?? false,
  };
  const app = express();
  app.disable("x-powered-by");
  // The client's address (per-address rate limits) comes from X-Forwarded-For only
  // through the proxies TRUST_PROXY names.
  app.set("trust proxy", options.trustProxy);
  app.use(requestLogging(options));
  app.use(securityHeaders(options));
  app.use(bodyLimits());
  // gzip or deflate for what compresses (HTML, JavaScript, CSS, JSON, CSV) on reads; streamed
  // HTML still streams, because the React Router writer flushes after every chunk. Answers to
  // requests with a body stay as they are: a refused upload's 413 must reach the client before
  // the connection is closed on the rest of its body, and zlib would hold it back.
  app.use(
    compression({
      filter: (req, res) => (req.method === "GET" || req.method === "HEAD") && compression.filter(req, res),
    }),
  );
  // A refused body goes straight to React Router, which answers it (even for a file's address).
  const unlessRefused =
    (handler: express.RequestHandler): express.RequestHandler =>
    (req, res, next) =>
      res.locals.bodyRefusal ? next() : handler(req, res, next);

  if (options.viteDevServer) {
    app.use(unlessRefused(options.viteDevServer.middlewares));
  } else {
    const client = path.join(root, "build", "client");
    app.use(
      "/assets",
      unlessRefused(express.static(path.join(client, "assets"), { immutable: true, maxAge: "1y", index: false })),
    );
    app.use(unlessRefused(express.static(client, { maxAge: "1h", index: false })));
  }
  // Browsers ask for /favicon.ico whatever the page links; answer with the SVG icon.
  app.get(
    "/favicon.ico",
    unlessRefused((_req, res) => res.redirect(301, "/favicon.svg")),
  );

  app.all("*", routerHandler(options));
  return app;
}

/** Loads the production bundle that `react-router build` wrote. */
export async function loadBuild(): Promise<ServerBuild> {
  const file = path.join(root, "build", "server", "index.js");
  if (!existsSync(file)) throw new Error("build/server/index.js is missing: run `npm run build` first");
  return (await import(pathToFileURL(file).href)) as ServerBuild;
}

// ---------------------------------------------------------------------------
// Running as a program

type Stoppable = { stop(): Promise<void> };

function acquireLock(lockFile: string): boolean {
  if (existsSync(lockFile)) {
    const pid = Number(readFileSync(lockFile, "utf8").trim());
    let alive = false;
    if (Number.isInteger(pid) && pid > 0) {
      try {
        process.kill(pid, 0);
        alive = true;
      } catch {
        alive = false;
      }
    }
    if (alive) return false;
    rmSync(lockFile, { force: true });
  }
  try {
    const fd = openSync(lockFile, "wx");
    writeFileSync(fd, String(process.pid));
    closeSync(fd);
    return true;
  } catch {
    return false;
  }
}

async function migrateAndSeed(databaseUrl: string, log: (line: string) => void) {
  process.env.DATABASE_URL = databaseUrl;
  const { default: config } = await import("./knexfile");
  const { default: knexFactory } = await import("knex");
  const knex = knexFactory({ ...config, connection: databaseUrl });
  try {
    const [, applied] = (await knex.migrate.latest()) as [number, string[]];
    log(applied.length ? `db: applied ${applied.length} migration(s)` : "db: schema is up to date");
    const [{ count }] = await knex("organisations").count<{ count: string }[]>({ count: "*" });
    if (Number(count) === 0) {
      await knex.seed.run();
      log("db: the database was empty, so the demo scenario was loaded");
    } else {
      log("db: the database holds data; demo data not loaded again (npm run db:reset starts over)");
    }
  } finally {
    await knex.destroy();
  }
}

async function main() {
  const args = new Set(process.argv.slice(2));
  const local = args.has("--local");
  const dev = args.has("--dev");
  const log = (line: string) => console.log(line);
  const toStop: Stoppable[] = [];
  let lockFile: string | undefined;

  const cleanUp = async () => {
    for (const s of toStop.reverse()) {
      try {
        await s.stop();
      } catch (error) {
        console.error(`while stopping: ${(error as Error).message}`);
      }
    }
    if (lockFile) rmSync(lockFile, { force: true });
  };

  let shuttingDown = false;
  const onSignal = (signal: NodeJS.Signals) => {
    if (shuttingDown) return;
    shuttingDown = true;
    log(`\n${signal}: stopping Wallcast…`);
    void cleanUp().then(() => process.exit(0));
  };
  process.on("SIGINT", onSignal);
  process.on("SIGTERM", onSignal);
  if (local) {
    // If whatever started us dies without passing the signal on (a shell between npm and
    // us), stop as if told to, so nothing started here is left behind.
    const parent = process.ppid;
    setInterval(() => {
      if (process.ppid !== parent) onSignal("SIGHUP");
    }, 2000).unref();
  }

  try {
    if (local) {
      const dataDir = spawnSync("bash", [path.join(root, "db", "cluster.sh"), "datadir"], {
        encoding: "utf8",
      }).stdout.trim();
      lockFile = path.join(dataDir || root, "wallcast-start.pid");
      if (!acquireLock(lockFile)) {
        console.error(
          `Wallcast is already running from this checkout (lock ${lockFile}). Stop it first (Ctrl-C or SIGTERM).`,
        );
        lockFile = undefined;
        process.exit(1);
      }
      const { startLocalStack } = await import("./fake-services/stack");
      const stack = await startLocalStack({ log });
      toStop.push(stack);
      process.env.DATABASE_URL ??= stack.databaseUrl;
      process.env.OIDC_ISSUER ??= stack.idpUrl;
      process.env.S3_ENDPOINT ??= stack.s3Url;
      process.env.RESEND_BASE_URL ??= stack.mailUrl;
      await migrateAndSeed(process.env.DATABASE_URL, log);
    }

    const { env } = await import("./app/services/env.server");
    const settings = env();
    if (!local) assertProductionSettings(settings);
    if (shuttingDown) return;

    let build: AppOptions["build"];
    let viteDevServer: AppOptions["viteDevServer"];
    if (dev) {
      const vite = await import("vite");
      const server = await vite.createServer({ server: { middlewareMode: true } });
      toStop.push({ stop: () => server.close() });
      viteDevServer = server;
      build = () => server.ssrLoadModule("virtual:react-router/server-build") as Promise<ServerBuild>;
    } else {
      if (local) {
        log("build: react-router build…");
        const r = spawnSync(
          process.execPath,
          [path.join(root, "node_modules", "@react-router", "dev", "bin.js"), "build"],
          {
            cwd: root,
            stdio: ["ignore", "ignore", "inherit"],
          },
        );
        if (r.status !== 0) throw new Error("the build failed (see above)");
      }
      build = await loadBuild();
    }

    const app = createApp({
      build,
      viteDevServer,
      logRequests: settings.LOG_REQUESTS,
      formActionOrigins: [originOf(settings.OIDC_ISSUER)].filter((o): o is string => Boolean(o)),
      imageOrigins: [originOf(settings.S3_ENDPOINT)].filter((o): o is string => Boolean(o)),
    });
    const server = app.listen(settings.PORT, settings.HOST);
    await new Promise<void>((resolve, reject) => {
      server.once("listening", resolve);
      server.once("error", reject);
    });
    toStop.unshift({
      stop: async () => {
        await new Promise<void>((resolve) => {
          server.close(() => resolve());
          server.closeIdleConnections();
          setTimeout(() => server.closeAllConnections(), 3000).unref();
        });
        if (typeof build !== "function") {
          const entry = build.entry.module as { shutdown?: () => Promise<void> };
          await entry.shutdown?.();
        }
      },
    });
    if (typeof build !== "function") {
      // The job queue (e-mail delivery, reminders) runs beside the server; if it cannot
      // start, pages still serve and the outbox keeps every message until it can.
      const entry = build.entry.module as { startBackgroundJobs?: () => Promise<void> };
      try {
        await entry.startBackgroundJobs?.();
      } catch (error) {
        console.error(`Background jobs did not start, so e-mail waits in the outbox: ${(error as Error).message}`);
      }
    }
    const address = server.address() as AddressInfo;
    const url = `http://${address.address}:${address.port}`;
    log("");
    log(`Wallcast is serving on ${url}`);
    if (local) {
      const { demoUsers } = await import("./fake-services/demo-users");
      log(`Demo inbox (sent e-mail): ${process.env.RESEND_BASE_URL}/`);
      log(`Demo identity provider:   ${process.env.OIDC_ISSUER}/`);
      log("Demo sign-ins (choose one on the identity provider's page, no password):");
      for (const u of demoUsers) log(`  ${u.email.padEnd(28)} ${u.description}`);
      log("Stop with Ctrl-C (or SIGTERM): everything started here stops with it.");
    }
  } catch (error) {
    console.error(`Wallcast could not start: ${(error as Error).message}`);
    await cleanUp();
    process.exit(1);
  }
}

const invokedDirectly = process.argv[1] && path.resolve(process.argv[1]) === fileURLToPath(import.meta.url);
if (invokedDirectly) void main();
