/**
 * Local S3: s3rver, its files under `<dataDir>/s3`, the bucket `wallcast-files` created at start.
 *
 * Credentials are s3rver's fixed pair: access key id `S3RVER`, secret access key `S3RVER`.
 *
 * Settings the app's @aws-sdk/client-s3 (v3) needs against it:
 *   new S3Client({
 *     endpoint: s3Url, region: "us-east-1", forcePathStyle: true,
 *     credentials: { accessKeyId: "S3RVER", secretAccessKey: "S3RVER" },
 *     // otherwise streamed uploads are stored with their chunk framing inside:
 *     requestChecksumCalculation: "WHEN_REQUIRED", responseChecksumValidation: "WHEN_REQUIRED",
 *   })
 * s3rver checks a presigned URL's expiry but not its SigV4 signature, so "a tampered URL is
 * refused" cannot be tested against it.
 *
 * The bucket allows cross-origin requests from loopback origins, so a browser can use
 * presigned URLs directly.
 */
import { mkdir } from "node:fs/promises";
import path from "node:path";
import S3rver from "s3rver";
import { closeServer, hostForUrl, logRequests } from "./http-util.ts";

export const S3_BUCKET = "wallcast-files";
export const S3_ACCESS_KEY_ID = "S3RVER";
export const S3_SECRET_ACCESS_KEY = "S3RVER";

export interface S3Options {
  host: string;
  port: number;
  dataDir: string;
  log?: (line: string) => void;
}

export interface S3Handle {
  url: string;
  stop(): Promise<void>;
}

const loopbackCors = `<CORSConfiguration>
  <CORSRule>
    <AllowedOrigin>http://127.0.0.1:*</AllowedOrigin>
    <AllowedOrigin>http://localhost:*</AllowedOrigin>
    <AllowedMethod>GET</AllowedMethod>
    <AllowedMethod>HEAD</AllowedMethod>
    <AllowedMethod>PUT</AllowedMethod>
    <AllowedMethod>POST</AllowedMethod>
    <AllowedMethod>DELETE</AllowedMethod>
    <AllowedHeader>*</AllowedHeader>
    <ExposeHeader>ETag</ExposeHeader>
    <MaxAgeSeconds>3000</MaxAgeSeconds>
  </CORSRule>
</CORSConfiguration>`;

export async function startS3(opts: S3Options): Promise<S3Handle> {
  const directory = path.join(opts.dataDir, "s3");
  await mkdir(directory, { recursive: true });
  const s3rver = new S3rver({
    address: opts.host,
    port: opts.port,
    directory,
    // s3rver's own logger is chatty; requests are logged by logRequests below instead.
    silent: true,
    resetOnClose: false,
    vhostBuckets: false,
    configureBuckets: [{ name: S3_BUCKET, configs: [loopbackCors] }],
  });
  const address = await s3rver.run();
  const server = s3rver.httpServer;
  if (!server) throw new Error("s3rver did not expose its HTTP server");
  if (opts.log) logRequests(server, "s3", opts.log);
  return {
    url: `http://${hostForUrl(opts.host)}:${address.port}`,
    stop: () => closeServer(server),
  };
}
