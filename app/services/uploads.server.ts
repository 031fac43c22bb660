import { createHash, randomUUID } from "node:crypto";
import { createReadStream, createWriteStream } from "node:fs";
import { mkdir, readFile, rm } from "node:fs/promises";
import { tmpdir } from "node:os";
import path from "node:path";
import { Readable } from "node:stream";
import type { ReadableStream as NodeWebStream } from "node:stream/web";
import { DeleteObjectCommand, GetObjectCommand, PutObjectCommand } from "@aws-sdk/client-s3";
import { getSignedUrl } from "@aws-sdk/s3-request-presigner";
import busboy from "busboy";
import { fileTypeFromBuffer } from "file-type";
import pLimit from "p-limit";
import sharp from "sharp";
import type { AttachmentKind } from "./attachment-kinds";
import { MAX_FILE_BYTES } from "./body-limits";
import { bucket, s3 } from "./storage.server";
import { Refused as UploadProblem } from "./outcome";

/**
 * Uploaded files: streaming a multipart body to a temporary file within a size limit
 * (hashing it and keeping its first bytes on the way), deciding what a file is from its
 * bytes, thumbnails, and the object-store calls for attachments. Every refusal is an
 * UploadProblem carrying the HTTP status and a sentence for the user.
 */

export { MAX_FILE_BYTES };
export const THUMBNAIL_PX = 480;
/** Presigned URLs are valid about five minutes (see presignedGet). */
export const PRESIGNED_SECONDS = 300;
/**
 * The most pixels a photo may have: 50 MP, an 8192 × 6144 phone photo (50,331,648 pixels),
 * decoded at most ≈ 200 MB (RGBA). A larger image, such as a small, highly compressed
 * "decompression bomb", is refused from its header, before it is decoded.
 */
export const MAX_IMAGE_PIXELS = 8192 * 6144;
/** Images decoded at the same time in this process; others wait their turn. */
export const IMAGE_JOBS_AT_ONCE = 2;
/** How much of a file's start is kept to tell its type (file-type reads at most a few kB). */
const HEAD_BYTES = 64 * 1024;

/** Uploads are refused with the shared outcome type (413, 415, 503…). */
export { UploadProblem };

export const megabytes = (bytes: number) => `${(bytes / (1024 * 1024)).toFixed(1)} MB`;

function tooLarge(bytes: number | null, name?: string): UploadProblem {
  const what = name ? `“${name}”` : "The upload";
  const size = bytes === null ? "larger than 20 MB" : megabytes(bytes);
  return new UploadProblem(
    413,
    `${what} is ${size}; the limit is 20 MB per file. Save the photo at a smaller size (most phones and cameras have a setting), or scan the lab sheet at a lower resolution.`,
  );
}

const garbled = () =>
  new UploadProblem(400, "The upload arrived incomplete or garbled. Try again; if it keeps failing, reload the page.");

// ------------------------------------------------------------------ reading the request

/**
 * A received file, on disk in a temporary file until `discard()`: its size, SHA-256 and
 * first bytes were taken while it streamed in, so it is never held in memory whole.
 */
export type ReceivedFile = {
  name: string;
  path: string;
  byteSize: number;
  sha256: string;
  /** The first bytes (at most 64 kB), to tell the type. */
  head: Buffer;
  discard(): Promise<void>;
};

/** A file already in memory (tests, small generated files), written to a temporary file like an upload. */
export async function receivedFileOf(name: string, bytes: Buffer): Promise<ReceivedFile> {
  return receiveStream(name, Readable.from([bytes]));
}

/** Where uploads wait while they are checked and stored: one folder per process, emptied as each finishes. */
export const uploadTempDir = () => path.join(tmpdir(), `wallcast-uploads-${process.pid}`);

async function receiveStream(name: string, source: Readable): Promise<ReceivedFile> {
  await mkdir(uploadTempDir(), { recursive: true, mode: 0o700 });
  const file = path.join(uploadTempDir(), randomUUID());
  const discard = () => rm(file, { force: true });
  const hash = createHash("sha256");
  const head: Buffer[] = [];
  let headBytes = 0;
  let byteSize = 0;
  let truncated = false;
  return new Promise<ReceivedFile>((resolve, reject) => {
    const out = createWriteStream(file, { flags: "wx", mode: 0o600 });
    const fail = (error: unknown) => {
      source.unpipe(out);
      source.resume(); // let the parser move on; what follows is discarded
      out.destroy();
      void discard().finally(() => reject(error));
    };
    source.on("data", (chunk: Buffer) => {
      byteSize += chunk.byteLength;
      hash.update(chunk);
      if (headBytes < HEAD_BYTES) {
        head.push(chunk.subarray(0, HEAD_BYTES - headBytes));
        headBytes += Math.min(chunk.byteLength, HEAD_BYTES - headBytes);
      }
    });
    source.on("limit", () => {
      truncated = true;
      fail(tooLarge(null, name));
    });
    source.on("error", fail);
    out.on("error", fail);
    out.on("finish", () => {
      if (truncated) return;
      resolve({ name, path: file, byteSize, sha256: hash.digest("hex"), head: Buffer.concat(head), discard });
    });
    source.pipe(out);
  });
}

/**
 * The fields and the (first) file of a multipart upload, read as it streams: the file goes
 * to a temporary file, hashed on the way, and is refused with 413 as soon as it passes
 * 20 MB (the Express entry has already refused a body larger than that and its envelope).
 * The caller discards the file when done with it.
 */
export async function readMultipart(
  request: Request,
): Promise<{ file: ReceivedFile | null; fields: Record<string, string> }> {
  const type = request.headers.get("Content-Type") ?? "";
  if (!/^multipart\/form-data;/i.test(type)) {
    throw new UploadProblem(400, "Send the file as a multipart form with the fields “file” and “kind”.");
  }
  if (!request.body) throw new UploadProblem(400, "The upload was empty: choose a file and try again.");
  let parser: busboy.Busboy;
  try {
    parser = busboy({
      headers: { "content-type": type },
      limits: { fileSize: MAX_FILE_BYTES, files: 1, fields: 20, fieldSize: 10 * 1024, parts: 40 },
    });
  } catch {
    throw garbled();
  }

  const fields: Record<string, string> = {};
  let received: Promise<ReceivedFile> | null = null;
  let fileStream: Readable | null = null;
  const body = Readable.fromWeb(request.body as unknown as NodeWebStream<Uint8Array>);
  const parsed = new Promise<void>((resolve, reject) => {
    parser.on("field", (name, value) => {
      fields[name] = value;
    });
    parser.on("file", (name, stream, info) => {
      if (name !== "file" || received) {
        stream.resume();
        return;
      }
      fileStream = stream;
      received = receiveStream(cleanFileName(info.filename ?? ""), stream);
      received.catch(() => undefined); // awaited below; a refusal must not go unhandled meanwhile
    });
    parser.on("close", resolve);
    parser.on("error", () => reject(garbled()));
    body.on("error", () => reject(garbled()));
  });
  body.pipe(parser);

  try {
    await parsed;
  } catch (error) {
    body.unpipe(parser);
    body.destroy();
    (fileStream as Readable | null)?.destroy(garbled()); // the file's temporary copy is removed
    const file = await (received as Promise<ReceivedFile> | null)?.catch(() => null);
    await file?.discard();
    throw error;
  }
  const file = received ? await (received as Promise<ReceivedFile>) : null;
  if (file && file.byteSize === 0 && file.name === "unnamed file") {
    await file.discard(); // the file input was left empty
    return { file: null, fields };
  }
  return { file, fields };
}

/** The last path segment, without control characters, at most 200 characters (keeping the extension). */
export function cleanFileName(raw: string): string {
  const base = (raw.split(/[/\\]/).pop() ?? "")
    .normalize("NFC")
    // eslint-disable-next-line no-control-regex -- control characters are exactly what is removed
    .replace(/[\u0000-\u001f\u007f]/g, "")
    .trim();
  if (!base) return "unnamed file";
  if (base.length <= 200) return base;
  const dot = base.lastIndexOf(".");
  const ext = dot > 0 && base.length - dot <= 10 ? base.slice(dot) : "";
  return base.slice(0, 200 - ext.length) + ext;
}

// ------------------------------------------------------------------ what the file is

export type StoredType = {
  contentType: "image/jpeg" | "image/png" | "image/webp" | "application/pdf" | "text/csv";
  ext: "jpg" | "png" | "webp" | "pdf" | "csv";
};

const accepted: Record<string, StoredType> = {
  "image/jpeg": { contentType: "image/jpeg", ext: "jpg" },
  "image/png": { contentType: "image/png", ext: "png" },
  "image/webp": { contentType: "image/webp", ext: "webp" },
  "application/pdf": { contentType: "application/pdf", ext: "pdf" },
};

/** What a refused file really is, in words, by the extension file-type reports for its bytes. */
const described: Record<string, string> = {
  exe: "a Windows program",
  dll: "a Windows program library",
  msi: "a Windows installer",
  cab: "a Windows cabinet archive",
  elf: "a Linux program",
  macho: "a macOS program",
  dmg: "a macOS disk image",
  apk: "an Android app",
  class: "a Java program",
  jar: "a Java program",
  wasm: "a WebAssembly program",
  zip: "a ZIP archive",
  rar: "a RAR archive",
  "7z": "a 7-Zip archive",
  gz: "a compressed archive",
  bz2: "a compressed archive",
  xz: "a compressed archive",
  zst: "a compressed archive",
  tar: "a TAR archive",
  iso: "a disc image",
  docx: "a Word document",
  doc: "a Word document",
  xlsx: "an Excel workbook",
  xls: "an Excel workbook",
  pptx: "a PowerPoint presentation",
  odt: "an OpenDocument text",
  ods: "an OpenDocument spreadsheet",
  rtf: "a rich-text document",
  epub: "an e-book",
  gif: "a GIF animation",
  tif: "a TIFF image",
  bmp: "a BMP image",
  ico: "an icon file",
  psd: "a Photoshop file",
  cr2: "a camera raw file",
  nef: "a camera raw file",
  dng: "a camera raw file",
  arw: "a camera raw file",
  mp4: "a video",
  mov: "a video",
  avi: "a video",
  mkv: "a video",
  webm: "a video",
  "3gp": "a video",
  mp3: "a sound recording",
  m4a: "a sound recording",
  wav: "a sound recording",
  ogg: "a sound recording",
  sqlite: "a database file",
  xml: "an XML document",
  html: "a web page",
  ps: "a PostScript file",
  eps: "a PostScript file",
};

const acceptedWords = "Attach photos as JPEG, PNG or WebP, and lab sheets as PDF (or as a photo).";

/**
 * The stored type of a file, decided from its first bytes; the name and the type the
 * browser declared play no part. PDFs are accepted only as lab sheets.
 */
export async function identify(file: Pick<ReceivedFile, "name" | "head">, kind: AttachmentKind): Promise<StoredType> {
  const found = await fileTypeFromBuffer(file.head);
  const name = `“${file.name}”`;
  if (!found) {
    throw new UploadProblem(
      415,
      `${name} is not a photo or PDF: its contents match no image or PDF format. ${acceptedWords}`,
    );
  }
  const type = accepted[found.mime];
  if (!type) {
    if (found.ext === "heic" || found.ext === "avif" || found.ext === "jxl") {
      const label = found.ext === "jxl" ? "JPEG XL" : found.ext.toUpperCase();
      throw new UploadProblem(
        415,
        `${name} is a ${label} photo, which not every browser can show. Set the phone or camera to save JPEG (“most compatible”), or convert the photo to JPEG, and attach it again.`,
      );
    }
    const what = described[found.ext] ?? `a ${found.ext.toUpperCase()} file`;
    throw new UploadProblem(415, `${name} is ${what}, not a photo or PDF. ${acceptedWords}`);
  }
  if (type.contentType === "application/pdf" && kind === "survey_photo") {
    throw new UploadProblem(
      415,
      `${name} is a PDF; a PDF can be attached only as the survey sheet. Choose “Survey sheet” for it, or attach the photo itself as JPEG, PNG or WebP.`,
    );
  }
  if (type.contentType === "application/pdf" && kind !== "lab_sheet" && kind !== "survey_sheet") {
    throw new UploadProblem(
      415,
      `${name} is a PDF; a PDF can be attached only as a lab sheet. Choose “Lab sheet” for it, or attach the photo itself as JPEG, PNG or WebP.`,
    );
  }
  return type;
}

export const sha256Hex = (bytes: Buffer) => createHash("sha256").update(bytes).digest("hex");

/** At most IMAGE_JOBS_AT_ONCE images are decoded at a time; the rest queue. */
const imageJobs = pLimit(IMAGE_JOBS_AT_ONCE);

/** How many image jobs run and how many wait (for the health of the queue, and tests). */
export const imageQueue = () => ({ running: imageJobs.activeCount, waiting: imageJobs.pendingCount });

/**
 * A JPEG of at most THUMBNAIL_PX on its longer side, turned upright by the photo's EXIF
 * orientation. sharp writes no metadata unless asked, so camera details and GPS
 * position stay out of the thumbnail (the original is kept byte for byte). The image's
 * size is read from its header first: more than MAX_IMAGE_PIXELS is refused undecoded.
 */
export async function makeThumbnail(file: Pick<ReceivedFile, "name" | "path">, type: StoredType): Promise<Buffer> {
  const damaged = () =>
    new UploadProblem(
      415,
      `“${file.name}” starts like a ${type.ext.toUpperCase()} image but could not be read (it may be cut short or damaged). Export or copy it again and retry.`,
    );
  return imageJobs(async () => {
    let width: number | undefined;
    let height: number | undefined;
    try {
      // The header only: metadata() decodes no pixels, so no pixel limit is needed to read the size.
      ({ width, height } = await sharp(file.path, { limitInputPixels: false }).metadata());
    } catch {
      throw damaged();
    }
    if (!width || !height) throw damaged();
    if (width * height > MAX_IMAGE_PIXELS) {
      throw new UploadProblem(
        413,
        `“${file.name}” is ${width} × ${height} pixels (${Math.round((width * height) / 1e6)} megapixels); photos are taken at up to 50 megapixels (8192 × 6144). Save it at a smaller size and attach it again.`,
      );
    }
    try {
      return await sharp(file.path, { limitInputPixels: MAX_IMAGE_PIXELS, failOn: "error" })
        .rotate()
        .resize({ width: THUMBNAIL_PX, height: THUMBNAIL_PX, fit: "inside", withoutEnlargement: true })
        .flatten({ background: "#ffffff" })
        .jpeg({ quality: 82, mozjpeg: true })
        .toBuffer();
    } catch {
      throw damaged();
    }
  });
}

/** The instrument's CSV export: at most 5 MB (its own cap, below the 20 MB of photos). */
export const MAX_CSV_EXPORT_BYTES = 5 * 1024 * 1024;

/**
 * An instrument's CSV export has no magic bytes: it is accepted when it is at most 5 MB of
 * valid UTF-8 text without NUL bytes whose first line holds a delimiter (comma, semicolon
 * or tab). The file is read from its temporary file (5 MB at most).
 */
export async function identifyCsvExport(file: Pick<ReceivedFile, "name" | "path" | "byteSize">): Promise<StoredType> {
  const name = `“${file.name}”`;
  if (file.byteSize > MAX_CSV_EXPORT_BYTES)
    throw new UploadProblem(
      413,
      `${name} is ${megabytes(file.byteSize)}; an instrument export may be at most 5 MB. Export the survey's readings only, or split the file.`,
    );
  const bytes = await readFile(file.path);
  const notText = () =>
    new UploadProblem(
      415,
      `${name} is not a text CSV export: attach the instrument's export as comma-, semicolon- or tab-separated text (UTF-8).`,
    );
  if (bytes.includes(0)) throw notText();
  let text: string;
  try {
    text = new TextDecoder("utf-8", { fatal: true }).decode(bytes);
  } catch {
    throw notText();
  }
  const firstLine =
    text
      .replace(/^\uFEFF/, "")
      .split(/\r?\n/)
      .find((l) => l.trim() !== "") ?? "";
  if (!/[,;\t]/.test(firstLine)) throw notText();
  return { contentType: "text/csv", ext: "csv" };
}

// ------------------------------------------------------------------ object store

/** Keys are namespaced by owner, so an owner's files can be listed, moved or erased together. */
export function attachmentKeys(ownerId: string, exposureId: string, attachmentId: string) {
  const prefix = `owners/${ownerId}/exposures/${exposureId}/${attachmentId}`;
  return { original: `${prefix}/original`, thumbnail: `${prefix}/thumb.jpg` };
}

/** The keys of a survey's file: `owners/<owner>/submissions/<submission>/<id>/…`. */
export function surveyAttachmentKeys(ownerId: string, submissionId: string, attachmentId: string) {
  const prefix = `owners/${ownerId}/submissions/${submissionId}/${attachmentId}`;
  return { original: `${prefix}/original`, thumbnail: `${prefix}/thumb.jpg` };
}

const STORE_TIMEOUT_MS = 60_000;

/**
 * A private object (no ACL: the bucket's default), with its SHA-256 checked by the store.
 * A file on disk is streamed from it (one attempt: a stream cannot be sent twice).
 */
export async function putObject(
  key: string,
  body: Buffer | { path: string; byteSize: number },
  contentType: string,
  sha256: string,
): Promise<void> {
  const streamed = !Buffer.isBuffer(body);
  await s3().send(
    new PutObjectCommand({
      Bucket: bucket(),
      Key: key,
      Body: streamed ? createReadStream(body.path) : body,
      ContentType: contentType,
      ContentLength: streamed ? body.byteSize : body.byteLength,
      ChecksumSHA256: Buffer.from(sha256, "hex").toString("base64"),
      CacheControl: "private, max-age=600",
    }),
    { abortSignal: AbortSignal.timeout(STORE_TIMEOUT_MS) },
  );
}

/** Deleting a key that does not exist succeeds (S3 semantics), so this is safe to repeat. */
export async function deleteObject(key: string): Promise<void> {
  await s3().send(new DeleteObjectCommand({ Bucket: bucket(), Key: key }), {
    abortSignal: AbortSignal.timeout(STORE_TIMEOUT_MS),
  });
}

const unreachableCodes = new Set(["ECONNREFUSED", "ENOTFOUND", "EAI_AGAIN", "EHOSTUNREACH", "ENETUNREACH"]);

/**
 * Whether the store was never reached (no connection made), so nothing can have been
 * written. Any other failure (a timeout, a 5xx, a reset mid-transfer) may have left an
 * object behind.
 */
export function storeNeverReached(error: unknown): boolean {
  const seen = new Set<unknown>();
  const walk = (e: unknown): boolean => {
    if (!e || typeof e !== "object" || seen.has(e)) return false;
    seen.add(e);
    const x = e as { code?: unknown; cause?: unknown; errors?: unknown };
    if (typeof x.code === "string" && unreachableCodes.has(x.code)) return true;
    if (Array.isArray(x.errors) && x.errors.length > 0 && x.errors.every(walk)) return true;
    return walk(x.cause);
  };
  return walk(error);
}

export const storeDown = () =>
  new UploadProblem(
    503,
    "The file store is not answering, so the file was not saved and nothing was kept. Try again in a few minutes; if it keeps failing, tell your Wallcast administrator.",
  );

/** A filename="…" parameter for Content-Disposition: an ASCII fallback plus the UTF-8 name (RFC 6266). */
export function contentDisposition(disposition: "inline" | "attachment", name: string): string {
  const ascii = name.replace(/[^\x20-\x7e]/g, "_").replace(/["\\]/g, "_");
  const encoded = encodeURIComponent(name).replace(/['()*]/g, (c) => `%${c.charCodeAt(0).toString(16).toUpperCase()}`);
  return `${disposition}; filename="${ascii}"; filename*=UTF-8''${encoded}`;
}

/** The name to save a file under: the original name, with the extension its bytes call for. */
export function downloadName(originalName: string, ext: string): string {
  const dot = originalName.lastIndexOf(".");
  const stem = dot > 0 ? originalName.slice(0, dot) : originalName;
  const current = dot > 0 ? originalName.slice(dot + 1).toLowerCase() : "";
  const same = current === ext || (ext === "jpg" && current === "jpeg");
  return same ? originalName : `${stem}.${ext}`;
}

const SIGNING_WINDOW_SECONDS = 120;

/**
 * A presigned GET valid for five to seven minutes. The signing time is rounded down to
 * a two-minute window so that repeated views within it get the same URL and the
 * browser can reuse its cached copy instead of fetching the image again.
 */
export async function presignedGet(
  key: string,
  options: { contentType: string; disposition: string },
): Promise<string> {
  const now = Math.floor(Date.now() / 1000);
  const signedAt = now - (now % SIGNING_WINDOW_SECONDS);
  return getSignedUrl(
    s3(),
    new GetObjectCommand({
      Bucket: bucket(),
      Key: key,
      ResponseContentType: options.contentType,
      ResponseContentDisposition: options.disposition,
    }),
    { expiresIn: PRESIGNED_SECONDS + SIGNING_WINDOW_SECONDS, signingDate: new Date(signedAt * 1000) },
  );
}

/** The answer for a file the user may not see, or that does not exist (the two look the same). */
export function notShared(
  detail = "There is no photo or lab sheet at this address, or it is not shared with your organisation.",
): Response {
  return new Response(detail, {
    status: 404,
    headers: { "Content-Type": "text/plain; charset=utf-8", "Cache-Control": "no-store" },
  });
}

/** A 302 to a presigned URL; it may be reused for a minute, as the URL stays valid five or more. */
export function presignedRedirect(url: string): Response {
  return new Response(null, {
    status: 302,
    headers: { Location: url, "Cache-Control": "private, max-age=60", "Referrer-Policy": "no-referrer" },
  });
}
