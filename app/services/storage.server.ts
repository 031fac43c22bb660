import { HeadBucketCommand, S3Client } from "@aws-sdk/client-s3";
import { env } from "./env.server";

let client: S3Client | undefined;

/**
 * The object store, through the AWS SDK. Locally the endpoint is the fake S3 server
 * (fake-services/); path-style addressing and checksums "when required" keep uploads
 * byte-exact against it and are harmless against AWS.
 */
export function s3(): S3Client {
  const e = env();
  client ??= new S3Client({
    region: e.S3_REGION,
    endpoint: e.S3_ENDPOINT,
    forcePathStyle: e.S3_FORCE_PATH_STYLE,
    credentials: { accessKeyId: e.S3_ACCESS_KEY_ID, secretAccessKey: e.S3_SECRET_ACCESS_KEY },
    requestChecksumCalculation: "WHEN_REQUIRED",
    responseChecksumValidation: "WHEN_REQUIRED",
    maxAttempts: 2,
  });
  return client;
}

export function bucket(): string {
  return env().S3_BUCKET;
}

export async function checkStorage(): Promise<"ok" | string> {
  try {
    await s3().send(new HeadBucketCommand({ Bucket: bucket() }), { abortSignal: AbortSignal.timeout(3000) });
    return "ok";
  } catch (error) {
    const e = error as { name?: string; message?: string };
    return `unreachable (${e.name ?? "error"}${e.message ? `: ${e.message.split("\n")[0]}` : ""})`;
  }
}

export function closeStorage(): void {
  client?.destroy();
  client = undefined;
}
