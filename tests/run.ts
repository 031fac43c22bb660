/**
 * `npm test`: every test of the project, on a fresh machine.
 *
 * 1. installs Debian's chromium with apt-get when /usr/bin/chromium is missing (root only);
 * 2. starts a private PostgreSQL cluster and the fake services on free loopback ports
 *    (so it runs beside `npm start`), and migrates a template database that every
 *    integration test file copies;
 * 3. builds the app (the HTTP and browser tests use the production build);
 * 4. runs the static checks, each counted as one test — the typecheck, ESLint
 *    (`eslint .`) and Prettier (`prettier --check .`) — then Vitest's unit, integration,
 *    HTTP and browser projects;
 * 5. prints `<passed> passed, <failed> failed` as the last line on stdout and exits
 *    non-zero on any failure.
 *
 * Extra arguments are handed to Vitest (e.g. `npm test -- tests/unit`); the static
 * checks then still run unless WALLCAST_SKIP_TYPECHECK=1 (which skips all three, for a
 * quick run of a subset). WALLCAST_SKIP_LINT=1 skips only ESLint and Prettier.
 */
import { spawn, spawnSync } from "node:child_process";
import { existsSync, mkdirSync, readFileSync, rmSync } from "node:fs";
import net from "node:net";
import path from "node:path";
import { fileURLToPath } from "node:url";
import knexFactory from "knex";
import { startLocalStack } from "../fake-services/stack";

const root = fileURLToPath(new URL("..", import.meta.url));
const results = path.join(root, "test-results");
const err = (line: string) => process.stderr.write(`${line}\n`);

function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const srv = net.createServer();
    srv.once("error", reject);
    srv.listen(0, "127.0.0.1", () => {
      const { port } = srv.address() as net.AddressInfo;
      srv.close(() => resolve(port));
    });
  });
}

function run(command: string, args: string[], env: NodeJS.ProcessEnv = process.env): Promise<number> {
  return new Promise((resolve) => {
    const child = spawn(command, args, { cwd: root, env, stdio: ["ignore", "inherit", "inherit"] });
    child.once("exit", (code, signal) => resolve(code ?? (signal ? 1 : 0)));
  });
}

function ensureChromium() {
  if (existsSync("/usr/bin/chromium")) return;
  if (process.getuid?.() !== 0) {
    err("test: /usr/bin/chromium is missing and this is not root; install Debian's chromium package");
    return;
  }
  err("test: installing Debian's chromium (once)…");
  const env = { ...process.env, DEBIAN_FRONTEND: "noninteractive" };
  spawnSync("apt-get", ["update", "-qq"], { stdio: ["ignore", "ignore", "inherit"], env });
  const r = spawnSync("apt-get", ["install", "-y", "-qq", "chromium"], { stdio: ["ignore", "ignore", "inherit"], env });
  if (r.status !== 0) err("test: apt-get install chromium failed; the browser tests will fail");
}

type VitestJson = {
  numPassedTests: number;
  numFailedTests: number;
  numTotalTests: number;
  testResults: Array<{ name: string; status: string; message?: string; assertionResults: unknown[] }>;
};

async function main() {
  const vitestArgs = process.argv.slice(2);
  mkdirSync(results, { recursive: true });
  ensureChromium();

  process.env.WALLCAST_QUIET_FAKES ??= "1"; // the fakes' request lines are not test output
  const pgPort = await freePort();
  const pgInstance = `pg-test-${pgPort}`;
  const stack = await startLocalStack({ pgPort, pgInstance, fakePorts: { idp: 0, s3: 0, mail: 0 }, log: err });
  let passed = 0;
  let failed = 0;
  try {
    // The template every integration test file copies (CREATE DATABASE … TEMPLATE).
    const admin = knexFactory({ client: "pg", connection: stack.databaseUrl, pool: { min: 0, max: 1 } });
    const template = "wallcast_template";
    await admin.raw(`drop database if exists ${template}`);
    await admin.raw(`create database ${template}`);
    await admin.destroy();
    const templateUrl = stack.databaseUrl.replace(/\/[^/]+$/, `/${template}`);
    const { default: config } = await import("../knexfile");
    const migrator = knexFactory({ ...config, connection: templateUrl });
    await migrator.migrate.latest();
    await migrator.destroy();

    const env: NodeJS.ProcessEnv = {
      ...process.env,
      NODE_ENV: "test",
      WALLCAST_TEST_ADMIN_URL: stack.databaseUrl,
      WALLCAST_TEST_TEMPLATE: template,
      DATABASE_URL: templateUrl,
      OIDC_ISSUER: stack.idpUrl,
      S3_ENDPOINT: stack.s3Url,
      RESEND_BASE_URL: stack.mailUrl,
      FAKE_MAIL_URL: stack.mailUrl,
      LOG_REQUESTS: "false",
      // demo secrets and plain http on loopback: allowed for the app processes tests start
      WALLCAST_ALLOW_INSECURE: "1",
    };

    err("test: building the app…");
    const buildStatus = await run(
      process.execPath,
      [path.join(root, "node_modules/@react-router/dev/bin.js"), "build"],
      env,
    );
    if (buildStatus !== 0) {
      err("test: the build failed");
      failed += 1;
    }

    // Static checks: one pass/fail line and one counted test each.
    const staticCheck = async (label: string, command: string, args: string[]) => {
      err(`test: ${label}…`);
      const status = await run(command, args, env);
      if (status === 0) passed += 1;
      else failed += 1;
      console.log(`${label}: ${status === 0 ? "passed" : "FAILED"}`);
    };
    if (process.env.WALLCAST_SKIP_TYPECHECK !== "1") {
      await staticCheck("typecheck", "npm", ["run", "--silent", "typecheck"]);
      if (process.env.WALLCAST_SKIP_LINT !== "1") {
        await staticCheck("eslint", process.execPath, [path.join(root, "node_modules/eslint/bin/eslint.js"), "."]);
        await staticCheck("prettier --check", process.execPath, [
          path.join(root, "node_modules/prettier/bin/prettier.cjs"),
          "--check",
          "--log-level=warn",
          ".",
        ]);
      }
    }

    const jsonFile = path.join(results, "vitest.json");
    rmSync(jsonFile, { force: true });
    const code = await run(
      process.execPath,
      [
        path.join(root, "node_modules/vitest/vitest.mjs"),
        "run",
        "--reporter=default",
        "--reporter=json",
        `--outputFile.json=${jsonFile}`,
        ...vitestArgs,
      ],
      env,
    );
    if (existsSync(jsonFile)) {
      const report = JSON.parse(readFileSync(jsonFile, "utf8")) as VitestJson;
      passed += report.numPassedTests;
      failed += report.numFailedTests;
      // A file that fails to load has no tests to count: count it as one failure.
      failed += report.testResults.filter((f) => f.status === "failed" && f.assertionResults.length === 0).length;
    } else {
      failed += 1;
    }
    if (code !== 0 && failed === 0) failed += 1;
  } finally {
    await stack.stop();
    rmSync(path.join(stack.dataDir, pgInstance), { recursive: true, force: true });
    rmSync(path.join(stack.dataDir, `${pgInstance}.log`), { force: true });
    rmSync(path.join(stack.dataDir, `fakes-${pgInstance}`), { recursive: true, force: true });
  }
  console.log(`${passed} passed, ${failed} failed`);
  process.exit(failed === 0 ? 0 : 1);
}

main().catch((error) => {
  err(`test: ${(error as Error).stack ?? String(error)}`);
  console.log("0 passed, 1 failed");
  process.exit(1);
});
