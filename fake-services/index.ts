/**
 * The local stand-ins for Wallcast's hosted services, all on loopback:
 *
 * - identity provider (OpenID Connect, authorization code + PKCE) — see idp.ts
 * - S3 (s3rver; keys S3RVER / S3RVER; bucket `wallcast-files`) — see s3.ts
 * - e-mail API compatible with the Resend SDK, with an inbox page — see mail.ts
 *
 * Ports default to FAKE_IDP_PORT (4011), FAKE_S3_PORT (4012) and FAKE_MAIL_PORT (4013);
 * port 0 picks a free port and the returned URLs carry the real one.
 */
import { mkdir } from "node:fs/promises";
import path from "node:path";
import { startIdp, type IdpHandle } from "./idp.ts";
import { startMail, type MailHandle } from "./mail.ts";
import { startS3, type S3Handle } from "./s3.ts";

export { demoUsers, type DemoUser } from "./demo-users.ts";
export { S3_ACCESS_KEY_ID, S3_BUCKET, S3_SECRET_ACCESS_KEY } from "./s3.ts";

export interface FakeServicesOptions {
  /** Listening address; default 127.0.0.1. */
  host?: string;
  idpPort?: number;
  s3Port?: number;
  mailPort?: number;
  /** s3rver's files go in `<dataDir>/s3`, the mail log in `<dataDir>/mail.jsonl`. */
  dataDir: string;
  /** No request logs at all. */
  quiet?: boolean;
}

export interface FakeServices {
  idpUrl: string;
  s3Url: string;
  mailUrl: string;
  stop(): Promise<void>;
}

function portFrom(explicit: number | undefined, envName: string, fallback: number): number {
  let value: number = fallback;
  if (explicit !== undefined) value = explicit;
  else {
    const raw = process.env[envName];
    if (raw !== undefined && raw.trim() !== "") value = Number(raw);
  }
  if (!Number.isInteger(value) || value < 0 || value > 65535) {
    throw new Error(`Invalid port for ${envName.replace(/^FAKE_|_PORT$/g, "").toLowerCase()}: ${String(value)}`);
  }
  return value;
}

export async function startFakeServices(opts: FakeServicesOptions): Promise<FakeServices> {
  const host = opts.host ?? "127.0.0.1";
  const idpPort = portFrom(opts.idpPort, "FAKE_IDP_PORT", 4011);
  const s3Port = portFrom(opts.s3Port, "FAKE_S3_PORT", 4012);
  const mailPort = portFrom(opts.mailPort, "FAKE_MAIL_PORT", 4013);
  const dataDir = path.resolve(opts.dataDir);
  await mkdir(dataDir, { recursive: true });
  const log = opts.quiet ? undefined : (line: string) => console.log(line);

  const started: Array<{ stop(): Promise<void> }> = [];
  const stopAll = async () => {
    const results = await Promise.allSettled(started.splice(0).map((s) => s.stop()));
    const failed = results.find((r): r is PromiseRejectedResult => r.status === "rejected");
    if (failed) throw failed.reason;
  };

  const named = async <T extends { stop(): Promise<void> }>(what: string, port: number, start: () => Promise<T>) => {
    try {
      const handle = await start();
      started.push(handle);
      return handle;
    } catch (err) {
      throw new Error(
        `Could not start the ${what} on ${host}:${port}: ${err instanceof Error ? err.message : String(err)}`,
        {
          cause: err,
        },
      );
    }
  };

  let idp: IdpHandle, s3: S3Handle, mail: MailHandle;
  try {
    idp = await named("identity provider", idpPort, () => startIdp({ host, port: idpPort, log }));
    s3 = await named("S3 service", s3Port, () => startS3({ host, port: s3Port, dataDir, log }));
    mail = await named("mail service", mailPort, () => startMail({ host, port: mailPort, dataDir, log }));
  } catch (err) {
    await stopAll().catch(() => undefined);
    throw err;
  }

  let stopping: Promise<void> | undefined;
  return {
    idpUrl: idp.url,
    s3Url: s3.url,
    mailUrl: mail.url,
    stop: () => (stopping ??= stopAll()),
  };
}
