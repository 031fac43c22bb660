import http from "node:http";
import { portOutsideEphemeralRange } from "../helpers/ports";
import type { Express } from "express";
import sharp from "sharp";
import request from "supertest";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { productionApp, shutdownApp } from "../helpers/app";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, type World } from "../helpers/fixtures";
import { sessionCookieFor } from "../helpers/session";

// The object store's address is read once per process, so this file has its own: a
// loopback port that is first closed (the store is down) and then answers every
// request with a 500 (the store is up but failing). The port lies below the ephemeral
// range, so no other test's server can be handed it while the store is meant to be down.
const port = await portOutsideEphemeralRange();
process.env.S3_ENDPOINT = `http://127.0.0.1:${port}`;

let db: TestDatabase;
let app: Express;
let w: World;
let tech: string;
let exposureId: string;
let failing: http.Server | undefined;
let deletesSucceed = false;

const jpeg = () =>
  sharp({ create: { width: 640, height: 480, channels: 3, background: "#556677" } })
    .jpeg()
    .toBuffer();
const rows = () => db.knex("attachments").select("id", "state");

beforeAll(async () => {
  db = await createTestDatabase();
  process.env.DATABASE_URL = db.url;
  w = await buildWorld(db.knex);
  const couponId = await w.coupon("T-300");
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
  failing?.closeAllConnections();
  await new Promise((r) => (failing ? failing.close(r) : r(undefined)));
  await shutdownApp();
  await db?.drop();
});

describe("uploads while the object store is out", () => {
  it("answers 503 in words and keeps no attachment row when the store cannot be reached", async () => {
    const res = await request(app)
      .post(`/lab/${exposureId}/attachments`)
      .set("Cookie", tech)
      .field("kind", "as_removed")
      .attach("file", await jpeg(), "coupon.jpg")
      .expect(503);
    expect(res.headers["content-type"]).toMatch(/application\/problem\+json/);
    expect(res.body.detail).toMatch(
      /The file store is not answering, so the file was not saved and nothing was kept\. Try again/,
    );
    expect(await rows()).toEqual([]);
    expect(await db.knex("audit_events").where({ action: "attachment.uploaded" }).first()).toBeUndefined();
  });

  it("keeps a pending row for the clean-up when the store fails after receiving data, and the clean-up finishes later", async () => {
    failing = http.createServer((req, res) => {
      req.resume();
      req.on("end", () => {
        if (req.method === "DELETE" && deletesSucceed) {
          res.writeHead(204).end();
          return;
        }
        res
          .writeHead(500, { "Content-Type": "application/xml" })
          .end("<Error><Code>InternalError</Code><Message>disk failed</Message></Error>");
      });
    });
    await new Promise<void>((r) => failing!.listen(port, "127.0.0.1", () => r()));

    await request(app)
      .post(`/lab/${exposureId}/attachments`)
      .set("Cookie", tech)
      .field("kind", "as_removed")
      .attach("file", await jpeg(), "coupon.jpg")
      .expect(503);
    // The object may be in the store, and could not be deleted: the row stays, hidden.
    const left = await rows();
    expect(left).toEqual([{ id: expect.any(String), state: "pending" }]);
    const list = await request(app).get(`/lab/${exposureId}/attachments`).set("Cookie", tech).expect(200);
    expect(list.body.attachments).toEqual([]);
    await request(app).get(`/attachments/${left[0].id}`).set("Cookie", tech).expect(404);

    const { cleanUpPendingAttachments } = await import("../../app/models/attachments.server");
    expect(await cleanUpPendingAttachments(db.knex, 0)).toEqual({ removed: 0, kept: 1 });
    deletesSucceed = true;
    expect(await cleanUpPendingAttachments(db.knex, 0)).toEqual({ removed: 1, kept: 0 });
    expect(await rows()).toEqual([]);
  });
});
