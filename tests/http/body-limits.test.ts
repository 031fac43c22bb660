import http from "node:http";
import type { AddressInfo } from "node:net";
import { Readable } from "node:stream";
import request from "supertest";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { bodyLimitFor, bodyLimits, MAX_FILE_BYTES } from "~/services/body-limits";
import { productionApp, shutdownApp } from "../helpers/app";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, type World } from "../helpers/fixtures";
import { sessionCookieFor } from "../helpers/session";

// The production handler listens on a loopback port in this process, so the memory the
// server uses for a request is this process's RSS (Vitest runs each file in its own process).
let db: TestDatabase;
let server: http.Server;
let base: URL;
let w: World;
let tech: string;
let exposureId: string;

const MB = 1024 * 1024;

beforeAll(async () => {
  db = await createTestDatabase();
  process.env.DATABASE_URL = db.url;
  w = await buildWorld(db.knex);
  const couponId = await w.coupon("L-100");
  const [e] = await db
    .knex("coupon_exposures")
    .insert({
      owner_id: w.owner.id,
      point_id: w.point,
      coupon_id: couponId,
      installed_at: db.knex.raw("now() - interval '60 days'"),
      removed_at: db.knex.raw("now() - interval '2 days'"),
      removed_by: w.users.tech.id,
      removed_by_organisation_id: w.monitoring.id,
    })
    .returning("id");
  exposureId = e.id;
  tech = await sessionCookieFor(db.knex, w.users.tech.id);
  const app = await productionApp();
  server = http.createServer(app);
  await new Promise<void>((resolve) => server.listen(0, "127.0.0.1", resolve));
  base = new URL(`http://127.0.0.1:${(server.address() as AddressInfo).port}`);
});
afterAll(async () => {
  server?.closeAllConnections();
  await new Promise((r) => (server ? server.close(r) : r(undefined)));
  await shutdownApp();
  await db?.drop();
});

type Sent = {
  status: number;
  headers: http.IncomingHttpHeaders;
  text: string;
  sentBytes: number;
  peakRssGrowth: number;
};

/**
 * Posts a body of `total` bytes generated on the fly (one reused 64 kB chunk, so the client
 * holds next to nothing), chunked unless `declare` sets a Content-Length, and samples this
 * process's RSS until the answer is in.
 */
async function post(
  path: string,
  options: {
    total: number;
    contentType: string;
    cookie?: string;
    head?: Buffer;
    declare?: number;
    method?: string;
    fill?: number;
  },
): Promise<Sent> {
  const chunk = Buffer.alloc(64 * 1024, options.fill ?? 0x61);
  let sentBytes = 0;
  const body = new Readable({
    read() {
      if (sentBytes === 0 && options.head) {
        sentBytes += options.head.byteLength;
        this.push(options.head);
        return;
      }
      if (sentBytes >= options.total) {
        this.push(null);
        return;
      }
      const part = chunk.subarray(0, Math.min(chunk.byteLength, options.total - sentBytes));
      sentBytes += part.byteLength;
      this.push(part);
    },
  });
  const baseline = process.memoryUsage().rss;
  let peak = baseline;
  const sampler = setInterval(() => (peak = Math.max(peak, process.memoryUsage().rss)), 5);
  try {
    return await new Promise<Sent>((resolve, reject) => {
      const headers: Record<string, string> = { "Content-Type": options.contentType };
      if (options.cookie) headers.Cookie = options.cookie;
      if (options.declare !== undefined) headers["Content-Length"] = String(options.declare);
      else headers["Transfer-Encoding"] = "chunked";
      const req = http.request(new URL(path, base), { method: options.method ?? "POST", headers });
      req.on("response", (res) => {
        const parts: Buffer[] = [];
        res.on("data", (d: Buffer) => parts.push(d));
        res.on("end", () =>
          resolve({
            status: res.statusCode ?? 0,
            headers: res.headers,
            text: Buffer.concat(parts).toString("utf8"),
            sentBytes,
            peakRssGrowth: Math.max(peak, process.memoryUsage().rss) - baseline,
          }),
        );
        res.on("error", reject);
      });
      // The server closes the connection after refusing: writing the rest then fails, as it should.
      req.on("error", (error: NodeJS.ErrnoException) => {
        if (error.code !== "EPIPE" && error.code !== "ECONNRESET") reject(error);
      });
      if (options.declare !== undefined && options.total === 0) req.end();
      else body.pipe(req);
    });
  } finally {
    clearInterval(sampler);
  }
}

const formHead = Buffer.from("intent=units&units=si&note=");

describe("the body limits table", () => {
  it("gives every route a limit and reserves 8 MB for the LIMS sample ingest", () => {
    expect(bodyLimitFor("POST", "/profile")).toMatchObject({ name: "form", bytes: 1 * MB, answer: "page" });
    expect(bodyLimitFor("POST", "/anything/at/all").bytes).toBe(1 * MB);
    expect(bodyLimitFor("POST", "/lab-import")).toMatchObject({ name: "CSV import", answer: "page" });
    expect(bodyLimitFor("POST", "/setup/coupons.data").name).toBe("CSV import");
    expect(bodyLimitFor("POST", "/setup/sites/7d0c8a53-2f0e-4b7c-9a51-2b1f4c3e9d10/import").name).toBe("CSV import");
    expect(bodyLimitFor("POST", "/setup/sites/7d0c8a53-2f0e-4b7c-9a51-2b1f4c3e9d10").name).toBe("form");
    expect(bodyLimitFor("POST", `/lab/${exposureId}/attachments`).bytes).toBeGreaterThan(MAX_FILE_BYTES);
    expect(bodyLimitFor("POST", "/api/v1/submissions")).toMatchObject({ bytes: 1 * MB, answer: "problem" });
    expect(bodyLimitFor("POST", "/api/v1/lims/samples")).toMatchObject({ bytes: 8 * MB, answer: "problem" });
    expect(bodyLimitFor("GET", "/profile").bytes).toBe(0);
    expect(bodyLimits.at(-1)?.path.test("/whatever")).toBe(true);
  });
});

describe("request bodies over their limit", () => {
  it("refuses a 300 MB chunked form post with the error page, 413, reading little of it and keeping memory flat", async () => {
    // Warm the page and the action first, so what is measured is the refused request only.
    await request(server).post("/profile").set("Cookie", tech).type("form").send("intent=units&units=si").expect(302);
    const res = await post("/profile", {
      total: 300 * MB,
      head: formHead,
      contentType: "application/x-www-form-urlencoded",
      cookie: tech,
    });
    expect(res.status).toBe(413);
    expect(res.headers.connection).toBe("close");
    expect(res.headers["content-type"]).toMatch(/text\/html/);
    expect(res.text).toContain("Too much was sent");
    expect(res.text).toContain("The form sent more than 1 MB");
    expect(res.sentBytes).toBeLessThan(64 * MB);
    expect(res.peakRssGrowth).toBeLessThan(64 * MB);
  });

  it("refuses a declared length over the limit before reading any of it", async () => {
    // Only the headers are sent: the answer cannot wait for a body that never comes.
    const res = await post("/profile", {
      total: 0,
      declare: 300 * MB,
      contentType: "application/x-www-form-urlencoded",
      cookie: tech,
    });
    expect(res.status).toBe(413);
    expect(res.headers.connection).toBe("close");
    expect(res.text).toContain("The form sent more than 1 MB");
  });

  it("refuses an oversized chunked upload with problem+json and stores nothing", async () => {
    const boundary = "----wallcast-limit-boundary";
    const head = Buffer.from(
      `--${boundary}\r\nContent-Disposition: form-data; name="kind"\r\n\r\nas_removed\r\n` +
        `--${boundary}\r\nContent-Disposition: form-data; name="file"; filename="huge.jpg"\r\nContent-Type: image/jpeg\r\n\r\n\xff\xd8\xff\xe0`,
      "latin1",
    );
    const res = await post(`/lab/${exposureId}/attachments`, {
      total: 300 * MB,
      head,
      contentType: `multipart/form-data; boundary=${boundary}`,
      cookie: tech,
      fill: 0xff,
    });
    expect(res.status).toBe(413);
    expect(res.headers["content-type"]).toMatch(/application\/problem\+json/);
    expect(JSON.parse(res.text)).toMatchObject({ status: 413, detail: expect.stringMatching(/20 MB per file/) });
    expect(res.sentBytes).toBeLessThan(80 * MB);
    expect(res.peakRssGrowth).toBeLessThan(64 * MB);
    expect(await db.knex("attachments").count({ n: "*" })).toEqual([{ n: "0" }]);
  });

  it("refuses an oversized JSON body with problem+json, and a route that takes no body answers without reading it", async () => {
    const declared = await post("/api/v1/submissions", {
      total: 0,
      declare: 300 * MB,
      contentType: "application/json",
      cookie: tech,
    });
    expect(declared.status).toBe(413);
    expect(declared.headers["content-type"]).toMatch(/application\/problem\+json/);
    const problem = JSON.parse(declared.text);
    expect(problem).toMatchObject({ status: 413, title: "Payload too large" });
    expect(problem.detail).toMatch(/larger than 1 MB, the limit for a JSON request/);
    expect(problem.requestId).toBe(declared.headers["x-request-id"]);

    // Chunked to a JSON route that takes no body: its own answer, the connection closed, the rest unread.
    const chunked = await post("/api/v1/submissions", {
      total: 300 * MB,
      head: Buffer.from('{"note":"'),
      contentType: "application/json",
      cookie: tech,
    });
    expect(chunked.status).toBe(405);
    expect(chunked.headers.connection).toBe("close");
    expect(chunked.sentBytes).toBeLessThan(64 * MB);
    expect(chunked.peakRssGrowth).toBeLessThan(64 * MB);
  });

  it("holds the LIMS ingest address to 8 MB and everything else under /api to 1 MB", async () => {
    const json = { total: 0, contentType: "application/json", cookie: tech };
    expect((await post("/api/v1/submissions", { ...json, declare: 2 * MB })).status).toBe(413);
    // Within its 8 MB, so not refused for its size: the route does not exist yet, so it is a 404.
    expect((await post("/api/v1/lims/samples", { ...json, declare: 2 * MB })).status).toBe(404);
    const over = await post("/api/v1/lims/samples", { ...json, declare: 9 * MB });
    expect(over.status).toBe(413);
    expect(JSON.parse(over.text).detail).toMatch(/larger than 8 MB, the limit for one LIMS sample batch/);
  });

  it("refuses a CSV import over its stated 2 MB with the error page saying so", async () => {
    const boundary = "----wallcast-csv-boundary";
    const head = Buffer.from(
      `--${boundary}\r\nContent-Disposition: form-data; name="file"; filename="lab.csv"\r\nContent-Type: text/csv\r\n\r\n`,
    );
    const res = await post("/lab-import", {
      total: 3 * MB,
      head,
      contentType: `multipart/form-data; boundary=${boundary}`,
      cookie: tech,
    });
    expect(res.status).toBe(413);
    expect(res.text).toContain(
      "The file is larger than 2 MB, the limit for one import; split it into several imports.",
    );
  });

  it("refuses a body on GET and HEAD, and on a file's address", async () => {
    const page = await post("/profile", { total: 10, method: "GET", contentType: "text/plain", cookie: tech });
    expect(page.status).toBe(413);
    expect(page.text).toContain("carries no body");
    const api = await post("/api/v1/me", { total: 10, method: "GET", contentType: "text/plain", cookie: tech });
    expect(api.status).toBe(413);
    expect(api.headers["content-type"]).toMatch(/application\/problem\+json/);
    const file = await post("/favicon.svg", { total: 10, method: "GET", contentType: "text/plain" });
    expect(file.status).toBe(413);
  });

  it("still takes bodies within the limit, on a connection that stays usable", async () => {
    const agent = request.agent(server);
    await agent.post("/profile").set("Cookie", tech).type("form").send("intent=units&units=us").expect(302);
    expect(await db.knex("users").where({ id: w.users.tech.id }).first("units")).toEqual({ units: "us" });
    await agent.get("/profile").set("Cookie", tech).expect(200);
  });
});
