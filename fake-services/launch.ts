/**
 * Starts the local services and keeps them running:
 *
 *   node --import tsx fake-services/launch.ts --data-dir <dir> [--quiet]
 *
 * When all three listen it prints exactly one line on stdout,
 *   FAKE_SERVICES_READY {"idpUrl":"…","s3Url":"…","mailUrl":"…"}
 * which a parent process waits for. Otherwise stdout carries one short line per request
 * (none with --quiet); a parent that pipes stdout must keep reading it. SIGTERM or SIGINT
 * closes the servers and exits 0; a failure to start exits 1 with the reason on stderr.
 * Ports: FAKE_IDP_PORT (4011), FAKE_S3_PORT (4012), FAKE_MAIL_PORT (4013); 0 = any free port.
 */
import { parseArgs } from "node:util";
import { startFakeServices, type FakeServices } from "./index.ts";

const usage = "Usage: node --import tsx fake-services/launch.ts --data-dir <dir> [--quiet]";

function fail(message: string): never {
  process.stderr.write(`${message}\n`);
  process.exit(1);
}

let args: { "data-dir"?: string; quiet?: boolean; help?: boolean };
try {
  args = parseArgs({
    options: {
      "data-dir": { type: "string" },
      quiet: { type: "boolean", default: false },
      help: { type: "boolean", short: "h", default: false },
    },
    strict: true,
    allowPositionals: false,
  }).values;
} catch (err) {
  fail(`${err instanceof Error ? err.message : String(err)}\n${usage}`);
}
if (args.help) {
  process.stdout.write(`${usage}\n`);
  process.exit(0);
}
const dataDir = args["data-dir"];
if (!dataDir) fail(`--data-dir is required.\n${usage}`);

let services: FakeServices | undefined;
let stopping = false;

async function shutdown(signal: NodeJS.Signals): Promise<void> {
  if (stopping) {
    // A second signal while closing: give up waiting.
    process.exit(1);
  }
  stopping = true;
  const timer = setTimeout(() => {
    process.stderr.write(`fake services: still closing 5 s after ${signal}, exiting anyway\n`);
    process.exit(1);
  }, 5000);
  timer.unref();
  try {
    await services?.stop();
    process.exit(0);
  } catch (err) {
    process.stderr.write(`fake services: error while stopping: ${err instanceof Error ? err.message : String(err)}\n`);
    process.exit(1);
  }
}

process.on("SIGTERM", (s) => void shutdown(s));
// Started by the app's launcher: if it dies without stopping us, stop too.
const parent = process.ppid;
setInterval(() => {
  if (process.ppid !== parent) void shutdown("SIGHUP");
}, 2000).unref();
process.on("SIGINT", (s) => void shutdown(s));
// Started with an IPC channel by a parent that has gone away: stop too.
process.on("disconnect", () => void shutdown("SIGTERM"));

try {
  services = await startFakeServices({ dataDir, quiet: args.quiet ?? false });
} catch (err) {
  fail(`fake services: ${err instanceof Error ? err.message : String(err)}`);
}
if (stopping) {
  await services.stop();
  process.exit(0);
}
const { idpUrl, s3Url, mailUrl } = services;
process.stdout.write(`FAKE_SERVICES_READY ${JSON.stringify({ idpUrl, s3Url, mailUrl })}\n`);
