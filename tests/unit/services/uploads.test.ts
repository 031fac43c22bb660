import { existsSync } from "node:fs";
import sharp from "sharp";
import { describe, expect, it } from "vitest";
import {
  IMAGE_JOBS_AT_ONCE,
  identify,
  imageQueue,
  makeThumbnail,
  MAX_IMAGE_PIXELS,
  receivedFileOf,
} from "~/services/uploads.server";

const photo = (width: number, height: number) =>
  sharp({ create: { width, height, channels: 3, background: "#6b7f8e" } })
    .jpeg()
    .toBuffer();

describe("received files", () => {
  it("keep their size, SHA-256 and first bytes, and leave no file behind when discarded", async () => {
    const bytes = await photo(300, 200);
    const file = await receivedFileOf("a.jpg", bytes);
    expect(file.byteSize).toBe(bytes.byteLength);
    expect(file.head.equals(bytes.subarray(0, file.head.byteLength))).toBe(true);
    expect(await identify(file, "as_removed")).toEqual({ contentType: "image/jpeg", ext: "jpg" });
    expect(existsSync(file.path)).toBe(true);
    await file.discard();
    expect(existsSync(file.path)).toBe(false);
  });
});

describe("image jobs", () => {
  it("caps a photo at 50 megapixels, an 8192 × 6144 phone photo", () => {
    expect(MAX_IMAGE_PIXELS).toBe(8192 * 6144);
  });

  it(`decode at most ${IMAGE_JOBS_AT_ONCE} images at a time; the others wait their turn`, async () => {
    const files = await Promise.all(
      Array.from({ length: 6 }, async (_, i) => receivedFileOf(`p${i}.jpg`, await photo(1600, 1200))),
    );
    let mostRunning = 0;
    let mostWaiting = 0;
    let done = false;
    const jobs = Promise.all(files.map((f) => makeThumbnail(f, { contentType: "image/jpeg", ext: "jpg" }))).finally(
      () => (done = true),
    );
    while (!done) {
      const q = imageQueue();
      mostRunning = Math.max(mostRunning, q.running);
      mostWaiting = Math.max(mostWaiting, q.waiting);
      await new Promise((r) => setImmediate(r));
    }
    const thumbs = await jobs;
    expect(mostRunning).toBe(IMAGE_JOBS_AT_ONCE);
    expect(mostWaiting).toBeGreaterThan(0);
    for (const t of thumbs) expect((await sharp(t).metadata()).width).toBe(480);
    await Promise.all(files.map((f) => f.discard()));
  });
});
