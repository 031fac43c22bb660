/**
 * The local stack that `npm start`, `npm run dev` and the test runner bring up on
 * 127.0.0.1: the project's own PostgreSQL cluster (db/cluster.sh) and the fake hosted
 * services (fake-services/launch.ts, a child process). Whatever this starts, `stop()`
 * stops; a cluster that was already running is left running.
 */
import { spawn, spawnSync, type ChildProcess } from "node:child_process";
import { mkdirSync } from "node:fs";
import path from "node:path";
import { fileURLToPath } from "node:url";

const root = fileURLToPath(new URL("..", import.meta.url));
const clusterScript = path.join(root, "db", "cluster.sh");

export type LocalStack = {
  databaseUrl: string;
  idpUrl: string;
  s3Url: string;
  mailUrl: string;
  dataDir: string;
  stop(): Promise<void>;
};

export type LocalStackOptions = {
  pgPort?: number;
  /** cluster folder name inside the data folder ("pg" for npm start). */
  pgInstance?: string;
  /** 0 picks free ports (tests); undefined keeps the fixed defaults 4011–4013. */
  fakePorts?: { idp?: number; s3?: number; mail?: number };
  log?: (line: string) => void;
};

function cluster(args: string[], env: NodeJS.ProcessEnv) {
  const r = spawnSync("bash", [clusterScript, ...args], { env, encoding: "utf8" });
  return { status: r.status ?? 1, stdout: r.stdout.trim(), stderr: r.stderr.trim() };
}

export async function startLocalStack(options: LocalStackOptions = {}): Promise<LocalStack> {
  const log = options.log ?? ((line: string) => console.log(line));
  const env: NodeJS.ProcessEnv = {
    ...process.env,
    WALLCAST_PG_PORT: String(options.pgPort ?? process.env.WALLCAST_PG_PORT ?? 54329),
    WALLCAST_PG_INSTANCE: options.pgInstance ?? process.env.WALLCAST_PG_INSTANCE ?? "pg",
  };

  const started = cluster(["start"], env);
  for (const line of started.stderr.split("\n").filter(Boolean)) log(line);
  if (started.status !== 0) throw new Error(`the database cluster did not start:\n${started.stderr}`);
  const clusterWasRunning = /already running/.test(started.stderr);
  const databaseUrl = cluster(["url"], env).stdout;
  const dataDir = cluster(["datadir"], env).stdout;

  // The fakes keep their files beside the cluster's folder, never inside it.
  const fakesDir = path.join(dataDir, `fakes-${env.WALLCAST_PG_INSTANCE}`);
  mkdirSync(fakesDir, { recursive: true });
  const portEnv = (name: string, value: number | undefined) => (value === undefined ? {} : { [name]: String(value) });
  const child: ChildProcess = spawn(
    process.execPath,
    ["--import", "tsx", path.join(root, "fake-services", "launch.ts"), "--data-dir", fakesDir],
    {
      cwd: root,
      env: {
        ...process.env,
        ...portEnv("FAKE_IDP_PORT", options.fakePorts?.idp),
        ...portEnv("FAKE_S3_PORT", options.fakePorts?.s3),
        ...portEnv("FAKE_MAIL_PORT", options.fakePorts?.mail),
      },
      stdio: ["ignore", "pipe", "pipe"],
    },
  );

  const stopCluster = async () => {
    if (clusterWasRunning) return;
    const stopped = cluster(["stop"], env);
    for (const line of stopped.stderr.split("\n").filter(Boolean)) log(line);
  };

  let urls: { idpUrl: string; s3Url: string; mailUrl: string };
  try {
    urls = await new Promise((resolve, reject) => {
      let buffer = "";
      const timer = setTimeout(() => reject(new Error("the local services did not start within 30 s")), 30_000);
      child.stdout!.setEncoding("utf8");
      child.stdout!.on("data", (chunk: string) => {
        buffer += chunk;
        let nl: number;
        while ((nl = buffer.indexOf("\n")) >= 0) {
          const line = buffer.slice(0, nl);
          buffer = buffer.slice(nl + 1);
          const m = /^FAKE_SERVICES_READY (.*)$/.exec(line);
          if (m) {
            clearTimeout(timer);
            resolve(JSON.parse(m[1]));
          } else if (line.trim() && !process.env.WALLCAST_QUIET_FAKES) {
            log(`fakes: ${line}`);
          }
        }
      });
      child.stderr!.setEncoding("utf8");
      child.stderr!.on("data", (chunk: string) => {
        for (const line of chunk.split("\n").filter(Boolean)) log(`fakes: ${line}`);
      });
      child.once("exit", (code) => {
        clearTimeout(timer);
        reject(new Error(`the local services exited early (code ${code}); are ports 4011–4013 free?`));
      });
    });
  } catch (error) {
    child.kill("SIGTERM");
    await stopCluster();
    throw error;
  }

  return {
    databaseUrl,
    dataDir,
    ...urls,
    async stop() {
      if (child.exitCode === null) {
        await new Promise<void>((resolve) => {
          const t = setTimeout(() => {
            child.kill("SIGKILL");
            resolve();
          }, 5000);
          child.once("exit", () => {
            clearTimeout(t);
            resolve();
          });
          child.kill("SIGTERM");
        });
      }
      await stopCluster();
    },
  };
}
