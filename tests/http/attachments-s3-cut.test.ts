import http from "node:http";
import { freePort } from "../helpers/ports";
import { HeadObjectCommand, ListObjectsV2Command, S3Client } from "@aws-sdk/client-s3";
import type { Express } from "express";
import sharp from "sharp";
import request from "supertest";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { productionApp, shutdownApp } from "../helpers/app";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, type World } from "../helpers/fixtures";
import { sessionCookieFor } from "../helpers/session";

/**
 * The object store goes down in the middle of an upload: the original reaches the store,
 * then the connection is cut while the thumbnail is being sent and the store stops
 * answering. The app's address for the store is a loopback proxy of this file in front of
 * the runner's fake S3, so the proxy can pass, cut and refuse; what is really in the
 * store is read from the fake S3 itself.
 */
const store = new URL(process.env.S3_ENDPOINT ?? "http://127.0.0.1:4012");
const direct = new S3Client({
  region: "us-east-1",
  endpoint: store.origin,
  forcePathStyle: true,
  credentials: { accessKeyId: "S3RVER", secretAccessKey: "S3RVER" },
  requestChecksumCalculation: "WHEN_REQUIRED",
  responseChecksumValidation: "WHEN_REQUIRED",
});
const bucket = process.env.S3_BUCKET ?? "wallcast-files";

const port = await freePort();
process.env.S3_ENDPOINT = `http://127.0.0.1:${port}`;

/** "cut": pass the first PUT, then cut the second one mid-body and stop listening. */
let mode: "pass" | "cut" = "pass";
let puts = 0;
const requests: string[] = [];
const proxy = http.createServer((req, res) => {
  requests.push(`${req.method} ${req.url}`);
  if (mode === "cut" && req.method === "PUT" && ++puts === 2) {
    req.once("data", () => {
      req.socket.destroy();
      void goDown();
    });
    return;
  }
  const up = http.request(
    { host: store.hostname, port: store.port, method: req.method, path: req.url, headers: req.headers },
    (answer) => {
      res.writeHead(answer.statusCode ?? 502, answer.headers);
      answer.pipe(res);
    },
  );
  up.on("error", () => res.destroy());
  req.pipe(up);
});
let listening = false;
const goUp = () =>
  new Promise<void>((r) =>
    proxy.listen(port, "127.0.0.1", () => {
      listening = true;
      r();
    }),
  );
async function goDown() {
  if (!listening) return;
  listening = false;
  await new Promise<void>((r) => {
    proxy.close(() => r());
    proxy.closeAllConnections();
  });
}

let db: TestDatabase;
let app: Express;
let w: World;
let tech: string;
let exposureId: string;

const jpeg = () =>
  sharp({
    create: {
      width: 1600,
      height: 1200,
      channels: 3,
      background: "#556677",
      noise: { type: "gaussian", mean: 128, sigma: 40 },
    },
  })
    .jpeg({ quality: 90 })
    .toBuffer();
const storedKeys = async (prefix: string) =>
  ((await direct.send(new ListObjectsV2Command({ Bucket: bucket, Prefix: prefix }))).Contents ?? []).map((o) => o.Key);

beforeAll(async () => {
  await goUp();
  db = await createTestDatabase();
  process.env.DATABASE_URL = db.url;
  w = await buildWorld(db.knex);
  const couponId = await w.coupon("T-310");
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
  app = await productionApp();
  tech = await sessionCookieFor(db.knex, w.users.tech.id);
});
afterAll(async () => {
  await goDown();
  await shutdownApp();
  direct.destroy();
  await db?.drop();
});

describe("the object store going down in the middle of an upload", () => {
  it("answers 503, keeps the half-stored upload hidden and pending, and the clean-up removes row and object once the store is back", async () => {
    // Through the proxy while it passes everything, an upload is stored whole.
    await request(app)
      .post(`/lab/${exposureId}/attachments`)
      .set("Cookie", tech)
      .field("kind", "as_removed")
      .attach("file", await jpeg(), "first.jpg")
      .expect(201);
    expect(await db.knex("attachments").select("state")).toEqual([{ state: "stored" }]);

    mode = "cut";
    const res = await request(app)
      .post(`/lab/${exposureId}/attachments`)
      .set("Cookie", tech)
      .field("kind", "as_removed")
      .attach("file", await jpeg(), "second.jpg")
      .expect(503);
    expect(res.headers["content-type"]).toMatch(/application\/problem\+json/);
    expect(res.body.detail).toMatch(/The file store is not answering, so the file was not saved/);
    expect(puts).toBeGreaterThanOrEqual(2);

    // The original reached the store before the cut; the row stays pending (its objects
    // could not be deleted while the store was down), hidden from every list and link.
    const pending = await db
      .knex("attachments")
      .where({ state: "pending" })
      .select("id", "object_key", "thumbnail_key");
    expect(pending).toHaveLength(1);
    const [row] = pending;
    await direct.send(new HeadObjectCommand({ Bucket: bucket, Key: row.object_key }));
    const prefix = row.object_key.slice(0, row.object_key.lastIndexOf("/") + 1);
    expect(await storedKeys(prefix)).toEqual([row.object_key]);
    const list = await request(app).get(`/lab/${exposureId}/attachments`).set("Cookie", tech).expect(200);
    expect(list.body.attachments.map((a: { name: string }) => a.name)).toEqual(["first.jpg"]);
    await request(app).get(`/attachments/${row.id}`).set("Cookie", tech).expect(404);
    expect(await db.knex("audit_events").where({ action: "attachment.uploaded" }).count({ n: "*" })).toEqual([
      { n: "1" },
    ]);

    // The clean-up job's work while the store is still down keeps the row for later; a
    // young pending row (an upload that may still be running) is left alone anyway.
    const { cleanUpPendingAttachments } = await import("../../app/models/attachments.server");
    expect(await cleanUpPendingAttachments(db.knex, 0)).toEqual({ removed: 0, kept: 1 });

    mode = "pass";
    await goUp();
    expect(await cleanUpPendingAttachments(db.knex, 30)).toEqual({ removed: 0, kept: 0 });
    expect(await cleanUpPendingAttachments(db.knex, 0)).toEqual({ removed: 1, kept: 0 });
    expect(await db.knex("attachments").select("state", "original_name")).toEqual([
      { state: "stored", original_name: "first.jpg" },
    ]);
    expect(await storedKeys(prefix)).toEqual([]);
    expect(requests.filter((r) => r.startsWith("DELETE")).length).toBeGreaterThanOrEqual(1);
  });
});
