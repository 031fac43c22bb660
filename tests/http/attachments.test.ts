import { createHash } from "node:crypto";
import { readdir } from "node:fs/promises";
import { GetObjectCommand, HeadObjectCommand, PutObjectCommand, S3Client } from "@aws-sdk/client-s3";
import type { Express } from "express";
import sharp from "sharp";
import request from "supertest";
import { afterAll, beforeAll, describe, expect, it, vi } from "vitest";
import { productionApp, shutdownApp } from "../helpers/app";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, type World } from "../helpers/fixtures";
import { sessionCookieFor } from "../helpers/session";
import { outcomeOf } from "../helpers/outcome";
import { uploadTempDir } from "~/services/uploads.server";

let db: TestDatabase;
let app: Express;
let w: World;
let exposureId: string;
let lockedExposureId: string;
const cookies: Record<"tech" | "engineer" | "manager" | "foreign" | "inspector" | "lapsed", string> = {} as never;

const store = () =>
  new S3Client({
    region: "us-east-1",
    endpoint: process.env.S3_ENDPOINT,
    forcePathStyle: true,
    credentials: { accessKeyId: "S3RVER", secretAccessKey: "S3RVER" },
    requestChecksumCalculation: "WHEN_REQUIRED",
    responseChecksumValidation: "WHEN_REQUIRED",
  });
const Bucket = "wallcast-files";
const getObject = async (key: string) =>
  Buffer.from(await (await store().send(new GetObjectCommand({ Bucket, Key: key }))).Body!.transformToByteArray());
const objectExists = async (key: string) =>
  store()
    .send(new HeadObjectCommand({ Bucket, Key: key }))
    .then(() => true)
    .catch((e: { name?: string }) => (e.name === "NotFound" ? false : Promise.reject(e)));

async function removedExposure(serial: string, point: string): Promise<string> {
  const couponId = await w.coupon(serial);
  const [row] = await db
    .knex("coupon_exposures")
    .insert({
      owner_id: w.owner.id,
      point_id: point,
      coupon_id: couponId,
      installed_at: db.knex.raw("now() - interval '91 days'"),
      installed_by: w.users.tech.id,
      installed_by_organisation_id: w.monitoring.id,
      removed_at: db.knex.raw("now() - interval '1 day'"),
      removed_by: w.users.tech.id,
      removed_by_organisation_id: w.monitoring.id,
    })
    .returning("id");
  return row.id;
}

/** A camera-like JPEG: 800 × 400 pixels stored sideways (EXIF orientation 6), with make, model and a GPS position. */
async function cameraJpeg(): Promise<Buffer> {
  return sharp({ create: { width: 800, height: 400, channels: 3, background: "#7a6f5c" } })
    .jpeg()
    .withMetadata({ orientation: 6 })
    .withExif({
      IFD0: { Make: "FieldCam", Model: "FC-9", Software: "FieldCam 2.1" },
      IFD3: {
        GPSLatitudeRef: "N",
        GPSLatitude: "29/1 44/1 1234/100",
        GPSLongitudeRef: "W",
        GPSLongitude: "95/1 8/1 4321/100",
      },
    })
    .toBuffer();
}
const png = () =>
  sharp({ create: { width: 300, height: 200, channels: 4, background: { r: 20, g: 90, b: 160, alpha: 0.5 } } })
    .png()
    .toBuffer();
const webp = () =>
  sharp({ create: { width: 640, height: 480, channels: 3, background: "#445566" } })
    .webp()
    .toBuffer();
/** A minimal, valid one-page PDF. */
const pdf = () =>
  Buffer.from(
    "%PDF-1.4\n1 0 obj << /Type /Catalog /Pages 2 0 R >> endobj\n2 0 obj << /Type /Pages /Kids [3 0 R] /Count 1 >> endobj\n" +
      "3 0 obj << /Type /Page /Parent 2 0 R /MediaBox [0 0 595 842] >> endobj\ntrailer << /Root 1 0 R >>\n%%EOF\n",
  );
/** The start of a Windows program: "MZ", the DOS stub's header, the PE signature. */
function windowsProgram(): Buffer {
  const b = Buffer.alloc(4096);
  b.write("MZ", 0, "latin1");
  b.writeUInt32LE(0x80, 0x3c);
  b.write("PE\0\0", 0x80, "latin1");
  return b;
}

const upload = (cookie: string, file: Buffer, filename: string, kind: string | null, exposure = exposureId) => {
  const req = request(app).post(`/lab/${exposure}/attachments`).set("Cookie", cookie);
  if (kind !== null) req.field("kind", kind);
  return req.attach("file", file, { filename, contentType: "application/octet-stream" });
};
const rowCount = async () => Number((await db.knex("attachments").count({ n: "*" }).first())!.n);
/** Uploads wait in a temporary file per request; none may stay behind. */
const waitingUploads = () => readdir(uploadTempDir()).catch(() => []);

beforeAll(async () => {
  db = await createTestDatabase();
  process.env.DATABASE_URL = db.url;
  w = await buildWorld(db.knex);
  exposureId = await removedExposure("T-100", w.point);
  lockedExposureId = await removedExposure("T-200", w.point2);
  app = await productionApp();
  cookies.tech = await sessionCookieFor(db.knex, w.users.tech.id);
  cookies.engineer = await sessionCookieFor(db.knex, w.users.engineer.id);
  cookies.manager = await sessionCookieFor(db.knex, w.users.manager.id);
  cookies.foreign = await sessionCookieFor(db.knex, w.users.engineer2.id);
  cookies.inspector = await sessionCookieFor(db.knex, w.users.inspector.id);
  cookies.lapsed = await sessionCookieFor(db.knex, w.users.lapsedTech.id);
});
afterAll(async () => {
  await shutdownApp();
  await db?.drop();
});

describe("uploading photos and lab sheets", () => {
  let photoId: string;

  it("stores a camera JPEG as sent and makes an upright thumbnail without EXIF or GPS", async () => {
    const jpeg = await cameraJpeg();
    expect((await sharp(jpeg).metadata()).exif).toBeDefined(); // the input does carry EXIF
    const res = await upload(cookies.tech, jpeg, "pull CP-1 as removed.jpg", "as_removed").expect(201);
    expect(res.body).toMatchObject({
      kind: "as_removed",
      contentType: "image/jpeg",
      byteSize: jpeg.byteLength,
      name: "pull CP-1 as removed.jpg",
      thumbnailUrl: `/attachments/${res.body.id}/thumbnail`,
      url: `/attachments/${res.body.id}`,
    });
    photoId = res.body.id;

    const row = await db.knex("attachments").where({ id: photoId }).first();
    expect(row).toMatchObject({
      state: "stored",
      owner_id: w.owner.id,
      exposure_id: exposureId,
      uploaded_by: w.users.tech.id,
      uploaded_by_organisation_id: w.monitoring.id,
      sha256: createHash("sha256").update(jpeg).digest("hex"),
      object_key: `owners/${w.owner.id}/exposures/${exposureId}/${photoId}/original`,
      thumbnail_key: `owners/${w.owner.id}/exposures/${exposureId}/${photoId}/thumb.jpg`,
    });
    expect((await getObject(row.object_key)).equals(jpeg)).toBe(true);
    expect(await waitingUploads()).toEqual([]);

    const thumb = await getObject(row.thumbnail_key);
    const meta = await sharp(thumb).metadata();
    expect(meta.format).toBe("jpeg");
    expect(meta.exif).toBeUndefined();
    expect(meta.xmp).toBeUndefined();
    expect(meta.orientation).toBeUndefined();
    // stored 800 × 400 sideways, so upright it is portrait: 240 × 480
    expect([meta.width, meta.height]).toEqual([240, 480]);
    expect(thumb.includes(Buffer.from("FieldCam"))).toBe(false);

    const audit = await db
      .knex("audit_events")
      .where({ record_type: "coupon_exposure", record_id: exposureId, action: "attachment.uploaded" });
    expect(audit).toHaveLength(1);
    expect(audit[0].after).toMatchObject({ attachment: photoId, kind: "as_removed", sha256: row.sha256 });
  });

  it("accepts PNG and WebP photos of any kind, judging by the bytes (a PNG named .pdf is a PNG)", async () => {
    const sheetPhoto = await upload(cookies.tech, await png(), "lab-sheet.pdf", "lab_sheet").expect(201);
    expect(sheetPhoto.body).toMatchObject({ contentType: "image/png", kind: "lab_sheet", name: "lab-sheet.pdf" });
    expect(sheetPhoto.body.thumbnailUrl).not.toBeNull();
    const cleaned = await upload(cookies.tech, await webp(), "after.bin", "after_cleaning").expect(201);
    expect(cleaned.body).toMatchObject({ contentType: "image/webp", kind: "after_cleaning" });
    // the full view saves under a name with the right extension
    const full = await request(app).get(sheetPhoto.body.url).set("Cookie", cookies.engineer).expect(302);
    expect(decodeURIComponent(full.headers.location)).toContain('filename="lab-sheet.png"');
  });

  it("accepts a PDF as a lab sheet only, without a thumbnail", async () => {
    const res = await upload(cookies.tech, pdf(), "Lab sheet T-100.pdf", "lab_sheet").expect(201);
    expect(res.body).toMatchObject({ contentType: "application/pdf", kind: "lab_sheet", thumbnailUrl: null });
    await request(app).get(`/attachments/${res.body.id}/thumbnail`).set("Cookie", cookies.engineer).expect(404);
    const full = await request(app).get(`/attachments/${res.body.id}`).set("Cookie", cookies.engineer).expect(302);
    expect(decodeURIComponent(full.headers.location)).toMatch(/inline; filename="Lab sheet T-100.pdf"/);
    const sheet = await fetch(full.headers.location);
    expect(sheet.headers.get("content-type")).toBe("application/pdf");
    expect(Buffer.from(await sheet.arrayBuffer()).equals(pdf())).toBe(true);

    const before = await rowCount();
    const refused = await upload(cookies.tech, pdf(), "coupon.pdf", "as_removed").expect(415);
    expect(refused.headers["content-type"]).toMatch(/application\/problem\+json/);
    expect(refused.body.detail).toMatch(/only as a lab sheet/);
    expect(await rowCount()).toBe(before);
  });

  it("refuses a Windows program named photo.jpg, a text file and a damaged JPEG with 415 in words", async () => {
    const before = await rowCount();
    const exe = await upload(cookies.tech, windowsProgram(), "photo.jpg", "as_removed").expect(415);
    expect(exe.body.detail).toBe(
      "“photo.jpg” is a Windows program, not a photo or PDF. Attach photos as JPEG, PNG or WebP, and lab sheets as PDF (or as a photo).",
    );
    const text = await upload(cookies.tech, Buffer.from("mass,0.1234\n"), "masses.jpg", "after_cleaning").expect(415);
    expect(text.body.detail).toMatch(/“masses.jpg” is not a photo or PDF/);
    const cut = (await cameraJpeg()).subarray(0, 400);
    const damaged = await upload(cookies.tech, cut, "cut.jpg", "as_removed").expect(415);
    expect(damaged.body.detail).toMatch(/could not be read/);
    expect(await rowCount()).toBe(before);
  });

  it("refuses more than 20 MB with 413, by the declared length and while reading", async () => {
    const before = await rowCount();
    const big = Buffer.alloc(21 * 1024 * 1024, 0xff);
    big.set([0xff, 0xd8, 0xff, 0xe0], 0);
    const declared = await upload(cookies.tech, big, "huge.jpg", "as_removed").expect(413);
    expect(declared.body.detail).toMatch(/the limit is 20 MB per file/);

    // A client that sends no Content-Length (chunked) is stopped while the body arrives.
    const boundary = "----wallcast-test-boundary";
    const head = Buffer.from(
      `--${boundary}\r\nContent-Disposition: form-data; name="kind"\r\n\r\nas_removed\r\n` +
        `--${boundary}\r\nContent-Disposition: form-data; name="file"; filename="huge.jpg"\r\nContent-Type: image/jpeg\r\n\r\n`,
    );
    const tail = Buffer.from(`\r\n--${boundary}--\r\n`);
    const chunked = request(app)
      .post(`/lab/${exposureId}/attachments`)
      .set("Cookie", cookies.tech)
      .set("Content-Type", `multipart/form-data; boundary=${boundary}`)
      .set("Transfer-Encoding", "chunked");
    const streamed = await new Promise<request.Response>((resolve, reject) => {
      chunked.on("response", resolve).on("error", reject);
      chunked.write(head);
      for (let i = 0; i < 21; i++) chunked.write(Buffer.alloc(1024 * 1024, 0xff));
      chunked.write(tail);
      chunked.end();
    });
    expect(streamed.status).toBe(413);
    expect(await rowCount()).toBe(before);
    // The refused upload's temporary file goes as its aborted read unwinds.
    await vi.waitFor(async () => expect(await waitingUploads()).toEqual([]));
  });

  it(
    "refuses a decompression bomb (a 20000 × 20000 PNG of a few hundred kB) by its header, naming the file",
    { timeout: 60_000 },
    async () => {
      const bomb = await sharp({
        create: { width: 20_000, height: 20_000, channels: 3, background: "#808080" },
        limitInputPixels: false,
      })
        .toColourspace("b-w")
        .png({ compressionLevel: 9 })
        .toBuffer();
      expect(bomb.byteLength).toBeLessThan(1024 * 1024);
      const before = await rowCount();
      const rss = process.memoryUsage().rss;
      const res = await upload(cookies.tech, bomb, "bomb.png", "as_removed").expect(413);
      expect(res.body.detail).toBe(
        "“bomb.png” is 20000 × 20000 pixels (400 megapixels); photos are taken at up to 50 megapixels (8192 × 6144). Save it at a smaller size and attach it again.",
      );
      // Decoding it would take 400 MB or more; it was refused from its header.
      expect(process.memoryUsage().rss - rss).toBeLessThan(64 * 1024 * 1024);
      expect(await rowCount()).toBe(before);
      expect(await waitingUploads()).toEqual([]);
    },
  );

  it("answers a missing kind or file with 400, the owner's staff with 403 and other tenants with 404", async () => {
    const jpeg = await cameraJpeg();
    const noKind = await upload(cookies.tech, jpeg, "a.jpg", null).expect(400);
    expect(noKind.body).toMatchObject({ field: "kind", detail: expect.stringMatching(/Choose what the file shows/) });
    await upload(cookies.tech, jpeg, "a.jpg", "close_up").expect(400);
    const noFile = await request(app)
      .post(`/lab/${exposureId}/attachments`)
      .set("Cookie", cookies.tech)
      .field("kind", "as_removed")
      .expect(400);
    expect(noFile.body.field).toBe("file");
    await request(app)
      .post(`/lab/${exposureId}/attachments`)
      .set("Cookie", cookies.tech)
      .send({ kind: "as_removed" })
      .expect(400);

    const engineer = await upload(cookies.engineer, jpeg, "a.jpg", "as_removed").expect(403);
    expect(engineer.body.detail).toMatch(/contractor's technicians/);
    await upload(cookies.inspector, jpeg, "a.jpg", "as_removed").expect(404);
    await upload(cookies.foreign, jpeg, "a.jpg", "as_removed").expect(404);
    await upload(cookies.lapsed, jpeg, "a.jpg", "as_removed").expect(404);
    await upload(cookies.tech, jpeg, "a.jpg", "as_removed", "not-a-uuid").expect(404);
    await upload(cookies.tech, jpeg, "a.jpg", "as_removed", w.owner.id).expect(404);
    await request(app).post(`/lab/${exposureId}/attachments`).attach("file", jpeg, "a.jpg").expect(401);
  });

  it("lists the exposure's attachments for the technician and the owner's staff only", async () => {
    const list = await request(app).get(`/lab/${exposureId}/attachments`).set("Cookie", cookies.tech).expect(200);
    expect(
      list.body.attachments.map((a: { kind: string; contentType: string }) => `${a.kind} ${a.contentType}`),
    ).toEqual([
      "as_removed image/jpeg",
      "lab_sheet image/png",
      "after_cleaning image/webp",
      "lab_sheet application/pdf",
    ]);
    expect(list.body.attachments.every((a: { canRemove: boolean }) => a.canRemove)).toBe(true);
    const owner = await request(app).get(`/lab/${exposureId}/attachments`).set("Cookie", cookies.manager).expect(200);
    expect(owner.body.attachments).toHaveLength(4);
    expect(owner.body.attachments.some((a: { canRemove: boolean }) => a.canRemove)).toBe(false);
    await request(app).get(`/lab/${exposureId}/attachments`).set("Cookie", cookies.inspector).expect(404);
    await request(app).get(`/lab/${exposureId}/attachments`).set("Cookie", cookies.foreign).expect(404);
  });

  it("shows the photos on the lab page", async () => {
    const page = await request(app).get(`/lab/${exposureId}`).set("Cookie", cookies.tech).expect(200);
    expect(page.text).toContain("Photos and lab sheet");
    expect(page.text).toContain(`/attachments/${photoId}/thumbnail`);
  });

  describe("viewing through presigned URLs", () => {
    it("redirects the owner's engineer and the technician to a signed, short-lived URL the store honours", async () => {
      const res = await request(app).get(`/attachments/${photoId}`).set("Cookie", cookies.engineer).expect(302);
      const location = new URL(res.headers.location);
      expect(location.origin).toBe(new URL(process.env.S3_ENDPOINT!).origin);
      expect(location.searchParams.get("X-Amz-Signature")).toMatch(/^[0-9a-f]{64}$/);
      const expires = Number(location.searchParams.get("X-Amz-Expires"));
      expect(expires).toBeGreaterThanOrEqual(300);
      expect(expires).toBeLessThanOrEqual(420);
      const original = await fetch(location);
      expect(original.status).toBe(200);
      expect(original.headers.get("content-type")).toBe("image/jpeg");
      expect(original.headers.get("content-disposition")).toMatch(/^inline; filename="pull CP-1 as removed.jpg"/);

      const thumb = await request(app).get(`/attachments/${photoId}/thumbnail`).set("Cookie", cookies.tech).expect(302);
      expect(thumb.headers.location).toContain("X-Amz-Signature=");
      const image = Buffer.from(await (await fetch(thumb.headers.location)).arrayBuffer());
      expect((await sharp(image).metadata()).exif).toBeUndefined();
      await request(app).get(`/attachments/${photoId}`).set("Cookie", cookies.manager).expect(302);
    });

    it("answers 404 to another owner's engineer, the inspection contractor, a lapsed contract and malformed ids", async () => {
      for (const who of ["foreign", "inspector", "lapsed"] as const) {
        const res = await request(app).get(`/attachments/${photoId}`).set("Cookie", cookies[who]).expect(404);
        expect(res.headers.location).toBeUndefined();
        expect(res.text).not.toContain("X-Amz");
        await request(app).get(`/attachments/${photoId}/thumbnail`).set("Cookie", cookies[who]).expect(404);
      }
      await request(app).get("/attachments/not-an-id").set("Cookie", cookies.engineer).expect(404);
      await request(app).get(`/attachments/${w.owner.id}/thumbnail`).set("Cookie", cookies.engineer).expect(404);
      const signedOut = await request(app).get(`/attachments/${photoId}`).expect(302);
      expect(signedOut.headers.location).toMatch(/^\/\?signin=required/);
    });
  });

  describe("removing", () => {
    it("lets the uploading contractor remove an attachment before submission, with its objects", async () => {
      const res = await upload(cookies.tech, await png(), "wrong coupon.png", "after_cleaning").expect(201);
      const row = await db.knex("attachments").where({ id: res.body.id }).first();
      await request(app)
        .delete(`/lab/${exposureId}/attachments?id=${res.body.id}`)
        .set("Cookie", cookies.engineer)
        .expect(403);
      await request(app)
        .delete(`/lab/${exposureId}/attachments?id=${res.body.id}`)
        .set("Cookie", cookies.inspector)
        .expect(404);
      await request(app)
        .delete(`/lab/${exposureId}/attachments?id=${res.body.id}`)
        .set("Cookie", cookies.tech)
        .expect(204);
      expect(await db.knex("attachments").where({ id: res.body.id }).first()).toBeUndefined();
      expect(await objectExists(row.object_key)).toBe(false);
      expect(await objectExists(row.thumbnail_key)).toBe(false);
      await request(app).get(`/attachments/${res.body.id}`).set("Cookie", cookies.engineer).expect(404);
      await request(app)
        .delete(`/lab/${exposureId}/attachments?id=${res.body.id}`)
        .set("Cookie", cookies.tech)
        .expect(404);
      await request(app).delete(`/lab/${exposureId}/attachments?id=nope`).set("Cookie", cookies.tech).expect(404);
      const removed = await db
        .knex("audit_events")
        .where({ record_id: exposureId, action: "attachment.removed" })
        .first("before");
      expect(removed.before).toMatchObject({ attachment: res.body.id, name: "wrong coupon.png" });
    });

    it("refuses changes once the results are in a submission already sent, and shows the photos to the reviewer", async () => {
      const kept = await upload(
        cookies.tech,
        await cameraJpeg(),
        "as removed.jpg",
        "as_removed",
        lockedExposureId,
      ).expect(201);
      const sheet = await upload(cookies.tech, pdf(), "T-200 lab sheet.pdf", "lab_sheet", lockedExposureId).expect(201);
      const { saveLabResult, submitForReview } = {
        ...(await import("../../app/models/lab-results.server")),
        ...(await import("../../app/models/submissions.server")),
      };
      const lab = {
        cleaningMethod: "",
        couponMassesG: [35.9],
        finalMassG: null,
        blankInitialMassG: null,
        blankMassesG: [],
        baseMetalFromCycle: null,
        pitDepthsMm: [],
        labNotes: "",
      };
      const saved = await outcomeOf(saveLabResult(db.knex, w.users.tech, lockedExposureId, lab));
      if (!saved.ok) throw new Error(JSON.stringify(saved.errors));
      const submitted = await outcomeOf(submitForReview(db.knex, w.users.tech, saved.submissionId));
      if (!submitted.ok) throw new Error(JSON.stringify(submitted.errors));
      const reference = submitted.reference;

      const remove = await request(app)
        .delete(`/lab/${lockedExposureId}/attachments?id=${kept.body.id}`)
        .set("Cookie", cookies.tech)
        .expect(409);
      expect(remove.body.detail).toContain(`submission ${reference}, which is submitted`);
      await upload(cookies.tech, await png(), "late.png", "after_cleaning", lockedExposureId).expect(409);
      const list = await request(app)
        .get(`/lab/${lockedExposureId}/attachments`)
        .set("Cookie", cookies.tech)
        .expect(200);
      expect(list.body.attachments.map((a: { canRemove: boolean }) => a.canRemove)).toEqual([false, false]);

      expect(await db.knex("attachments").where({ exposure_id: lockedExposureId }).select("id")).toHaveLength(2);

      // the owner's review page shows the thumbnail and the lab sheet inside the coupon's card
      const review = await request(app)
        .get(`/review/${saved.submissionId}`)
        .set("Cookie", cookies.engineer)
        .expect(200);
      expect(review.text).toContain(`href="/attachments/${kept.body.id}"`);
      expect(review.text).toContain(`src="/attachments/${kept.body.id}/thumbnail"`);
      expect(review.text).toContain(`href="/attachments/${sheet.body.id}"`);
      expect(review.text).toContain("T-200 lab sheet.pdf");
      expect(review.text).not.toContain(`/attachments/${photoId}`); // another coupon's photo stays on its own card
      await request(app).get(`/review/${saved.submissionId}`).set("Cookie", cookies.foreign).expect(404);
    });
  });
});

describe("the clean-up of interrupted uploads", () => {
  it("deletes pending rows and the objects they may have left, and nothing else", async () => {
    const { cleanUpPendingAttachments } = await import("../../app/models/attachments.server");
    const id = "00000000-0000-4000-8000-000000000001";
    const key = `owners/${w.owner.id}/exposures/${exposureId}/${id}/original`;
    await store().send(new PutObjectCommand({ Bucket, Key: key, Body: "half", ContentType: "image/jpeg" }));
    await db.knex("attachments").insert({
      id,
      owner_id: w.owner.id,
      exposure_id: exposureId,
      kind: "as_removed",
      content_type: "image/jpeg",
      byte_size: 4,
      sha256: "0".repeat(64),
      object_key: key,
      thumbnail_key: `owners/${w.owner.id}/exposures/${exposureId}/${id}/thumb.jpg`,
      original_name: "interrupted.jpg",
      state: "pending",
      uploaded_by: w.users.tech.id,
      uploaded_by_organisation_id: w.monitoring.id,
      created_at: db.knex.raw("now() - interval '2 hours'"),
    });
    const stored = await rowCount();
    expect(await cleanUpPendingAttachments(db.knex, 60)).toEqual({ removed: 1, kept: 0 });
    expect(await objectExists(key)).toBe(false);
    expect(await rowCount()).toBe(stored - 1);
    expect(await db.knex("attachments").where({ state: "pending" }).count({ n: "*" }).first()).toEqual({ n: "0" });
  });

  it("has the database refuse keys outside the owner's namespace and PDFs that are not lab sheets", async () => {
    const base = {
      owner_id: w.owner.id,
      exposure_id: exposureId,
      kind: "as_removed",
      content_type: "image/jpeg",
      byte_size: 10,
      sha256: "a".repeat(64),
      original_name: "x.jpg",
      uploaded_by: w.users.tech.id,
      uploaded_by_organisation_id: w.monitoring.id,
    };
    const id = "00000000-0000-4000-8000-000000000002";
    await expect(
      db.knex("attachments").insert({
        ...base,
        id,
        object_key: `owners/${w.owner2.id}/exposures/${exposureId}/${id}/original`,
        thumbnail_key: null,
      }),
    ).rejects.toThrow(/attachments_object_key_check/);
    await expect(
      db.knex("attachments").insert({
        ...base,
        id,
        content_type: "application/pdf",
        object_key: `owners/${w.owner.id}/exposures/${exposureId}/${id}/original`,
        thumbnail_key: null,
      }),
    ).rejects.toThrow(/attachments_pdf_is_a_sheet_check/); // a lab sheet, or a survey's sheet
    await expect(
      db.knex("attachments").insert({
        ...base,
        id,
        byte_size: 20 * 1024 * 1024 + 1,
        object_key: `owners/${w.owner.id}/exposures/${exposureId}/${id}/original`,
        thumbnail_key: `owners/${w.owner.id}/exposures/${exposureId}/${id}/thumb.jpg`,
      }),
    ).rejects.toThrow(/attachments_byte_size_check/);
  });
});

describe("each photo filed as what it shows", () => {
  it("keeps the kind chosen, a close-up of a pit included, and refuses a file sent without one, storing nothing", async () => {
    const couponId = await w.coupon("T-300");
    const [{ id: earlier }] = await db
      .knex("coupon_exposures")
      .insert({
        owner_id: w.owner.id,
        point_id: w.point,
        coupon_id: couponId,
        installed_at: db.knex.raw("now() - interval '300 days'"),
        installed_by: w.users.tech.id,
        installed_by_organisation_id: w.monitoring.id,
        removed_at: db.knex.raw("now() - interval '200 days'"),
        removed_by: w.users.tech.id,
        removed_by_organisation_id: w.monitoring.id,
      })
      .returning("id");
    const before = await rowCount();
    const unkinded = await upload(cookies.tech, await png(), "pit.png", "", earlier).expect(400);
    expect(unkinded.body).toMatchObject({
      field: "kind",
      detail: "Choose what the file shows: as removed, after cleaning, close-up of a pit or lab sheet.",
    });
    expect(await rowCount()).toBe(before);

    const kinds = ["pit_close_up", "after_cleaning", "as_removed"];
    for (const kind of kinds) {
      const res = await upload(cookies.tech, await png(), `${kind}.png`, kind, earlier).expect(201);
      expect(res.body.kind).toBe(kind);
    }
    const stored = await db.knex("attachments").where({ exposure_id: earlier }).orderBy("created_at").select("kind");
    expect(stored.map((r) => r.kind)).toEqual(kinds);
    const list = await request(app).get(`/lab/${earlier}/attachments`).set("Cookie", cookies.tech).expect(200);
    expect(list.body.attachments.map((a: { kind: string }) => a.kind).sort()).toEqual([...kinds].sort());
  });
});
