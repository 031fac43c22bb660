import { freePort } from "../helpers/ports";
import request from "supertest";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { productionApp, shutdownApp } from "../helpers/app";
import { createTestDatabase, type TestDatabase } from "../helpers/db";

// The object store's address is read once per process, so this file has its own: a
// loopback port nothing listens on (the store is down) while the database is up.
const port = await freePort();
process.env.S3_ENDPOINT = `http://127.0.0.1:${port}`;

let db: TestDatabase;
beforeAll(async () => {
  db = await createTestDatabase();
  process.env.DATABASE_URL = db.url;
});
afterAll(async () => {
  await shutdownApp();
  await db?.drop();
});

describe("/healthz when the object store is out", () => {
  it("stays ready (200) as degraded, naming the store and nothing of the error", async () => {
    const app = await productionApp();
    const res = await request(app).get("/healthz").expect(200);
    expect(res.body).toEqual({ status: "degraded", db: "ok", storage: "down" });
    expect(res.text).not.toContain(String(port));
    expect(res.text).not.toMatch(/ECONNREFUSED|unreachable|Error/);
  });
});
