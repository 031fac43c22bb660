import type { Express } from "express";
import request from "supertest";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { productionApp, shutdownApp } from "../helpers/app";
import { createTestDatabase, type TestDatabase } from "../helpers/db";

let db: TestDatabase;
let app: Express;

beforeAll(async () => {
  db = await createTestDatabase();
  process.env.DATABASE_URL = db.url;
  app = await productionApp();
});
afterAll(async () => {
  await shutdownApp();
  await db?.drop();
});

describe("the app shell", () => {
  it("answers /healthz with the state of the database and the object store", async () => {
    const res = await request(app).get("/healthz").expect(200);
    expect(res.headers["content-type"]).toMatch(/application\/json/);
    expect(res.body).toEqual({ status: "ok", db: "ok", storage: "ok" });
  });

  it("sends security headers with a per-request script nonce that the page uses", async () => {
    const a = await request(app).get("/").expect(200);
    const b = await request(app).get("/").expect(200);
    const csp = a.headers["content-security-policy"] as string;
    expect(csp).toMatch(/frame-ancestors 'none'/);
    const nonce = /'nonce-([^']+)'/.exec(csp)?.[1];
    expect(nonce).toBeTruthy();
    expect(b.headers["content-security-policy"]).not.toContain(nonce);
    expect(a.text).toContain(`nonce="${nonce}"`);
    expect(a.headers["x-content-type-options"]).toBe("nosniff");
    expect(a.headers["referrer-policy"]).toBe("strict-origin-when-cross-origin");
    expect(a.headers["x-request-id"]).toMatch(/^[0-9a-f-]{36}$/);
  });

  it("answers an unknown page with a designed 404", async () => {
    const res = await request(app).get("/no/such/page").expect(404);
    expect(res.text).toContain("Not found");
  });

  it("serves the favicon and the font shipped with the app", async () => {
    await request(app).get("/favicon.svg").expect(200).expect("content-type", /svg/);
    const page = await request(app).get("/");
    const css = /href="(\/assets\/[^"]+\.css)"/.exec(page.text)?.[1];
    expect(css).toBeTruthy();
    const sheet = await request(app).get(css!).expect(200);
    const font = /url\((\/assets\/work-sans-latin-400-normal[^)]+\.woff2)\)/.exec(sheet.text)?.[1];
    expect(font).toBeTruthy();
    await request(app).get(font!).expect(200);
  });

  it("compresses pages, scripts and style sheets for browsers that accept gzip, and leaves fonts as they are", async () => {
    const page = await request(app).get("/").set("Accept-Encoding", "gzip").expect(200);
    expect(page.headers["content-encoding"]).toBe("gzip");
    expect(page.text).toContain("</html>"); // supertest inflates: the whole streamed page arrived
    const script = /<script[^>]+src="(\/assets\/[^"]+\.js)"|href="(\/assets\/[^"]+\.js)"/.exec(page.text);
    const js = script?.[1] ?? script?.[2];
    expect(js).toBeTruthy();
    const plain = await request(app).get(js!).set("Accept-Encoding", "identity").expect(200);
    const zipped = await request(app).get(js!).set("Accept-Encoding", "gzip").expect(200);
    expect(plain.headers["content-encoding"]).toBeUndefined();
    expect(zipped.headers["content-encoding"]).toBe("gzip");
    const css = /href="(\/assets\/[^"]+\.css)"/.exec(page.text)?.[1];
    const sheet = await request(app).get(css!).set("Accept-Encoding", "gzip").expect(200);
    expect(sheet.headers["content-encoding"]).toBe("gzip");
    const font = /url\((\/assets\/work-sans-latin-400-normal[^)]+\.woff2)\)/.exec(sheet.text)?.[1];
    const woff = await request(app).get(font!).set("Accept-Encoding", "gzip").expect(200);
    expect(woff.headers["content-encoding"]).toBeUndefined(); // already compressed
  });
});
