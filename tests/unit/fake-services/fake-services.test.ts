import { spawn } from "node:child_process";
import { createHash, randomBytes } from "node:crypto";
import { mkdtemp, readFile, rm } from "node:fs/promises";
import os from "node:os";
import path from "node:path";
import { fileURLToPath } from "node:url";
import { GetObjectCommand, PutObjectCommand, S3Client } from "@aws-sdk/client-s3";
import { createRemoteJWKSet, decodeJwt, jwtVerify } from "jose";
import { Resend } from "resend";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { demoUsers, startFakeServices, type FakeServices } from "../../../fake-services/index.ts";

const root = fileURLToPath(new URL("../../../", import.meta.url));
const CLIENT_ID = "wallcast";
const CLIENT_SECRET = "wallcast-demo-secret";
const REDIRECT_URI = "http://127.0.0.1:3999/auth/callback";

let dataDir: string;
let services: FakeServices;

beforeAll(async () => {
  dataDir = await mkdtemp(path.join(os.tmpdir(), "wallcast-fakes-"));
  services = await startFakeServices({ dataDir, idpPort: 0, s3Port: 0, mailPort: 0, quiet: true });
});

afterAll(async () => {
  await services?.stop();
  if (dataDir) await rm(dataDir, { recursive: true, force: true });
});

function pkcePair() {
  const verifier = randomBytes(32).toString("base64url");
  const challenge = createHash("sha256").update(verifier).digest("base64url");
  return { verifier, challenge };
}

function authorizeUrl(params: Record<string, string>): string {
  const url = new URL(`${services.idpUrl}/authorize`);
  const defaults = {
    response_type: "code",
    client_id: CLIENT_ID,
    redirect_uri: REDIRECT_URI,
    scope: "openid email profile",
    state: "state-123",
  };
  for (const [k, v] of Object.entries({ ...defaults, ...params })) url.searchParams.set(k, v);
  return url.href;
}

/** Signs `email` in with login_hint and returns the code and the callback URL. */
async function signIn(email: string, challenge: string, extra: Record<string, string> = {}) {
  const res = await fetch(
    authorizeUrl({ login_hint: email, code_challenge: challenge, code_challenge_method: "S256", ...extra }),
    { redirect: "manual" },
  );
  expect(res.status).toBe(302);
  const location = new URL(res.headers.get("location") ?? "");
  expect(`${location.origin}${location.pathname}`).toBe(REDIRECT_URI);
  const code = location.searchParams.get("code");
  expect(code).toBeTruthy();
  return { code: code as string, location };
}

async function redeem(code: string, verifier: string, clientId = CLIENT_ID) {
  const res = await fetch(`${services.idpUrl}/token`, {
    method: "POST",
    headers: {
      "Content-Type": "application/x-www-form-urlencoded",
      Authorization: `Basic ${Buffer.from(`${clientId}:${CLIENT_SECRET}`).toString("base64")}`,
    },
    body: new URLSearchParams({
      grant_type: "authorization_code",
      code,
      redirect_uri: REDIRECT_URI,
      code_verifier: verifier,
    }),
  });
  return { status: res.status, body: (await res.json()) as Record<string, unknown> };
}

async function verifyIdToken(idToken: string) {
  const discovery = (await (await fetch(`${services.idpUrl}/.well-known/openid-configuration`)).json()) as {
    jwks_uri: string;
  };
  const jwks = createRemoteJWKSet(new URL(discovery.jwks_uri));
  const { payload } = await jwtVerify(idToken, jwks, { issuer: services.idpUrl, audience: CLIENT_ID });
  return payload;
}

describe("identity provider", () => {
  it("listens on 127.0.0.1 and publishes that issuer in discovery", async () => {
    expect(services.idpUrl).toMatch(/^http:\/\/127\.0\.0\.1:\d+$/);
    const res = await fetch(`${services.idpUrl}/.well-known/openid-configuration`);
    expect(res.status).toBe(200);
    const doc = (await res.json()) as Record<string, unknown>;
    expect(doc["issuer"]).toBe(services.idpUrl);
    for (const key of [
      "authorization_endpoint",
      "token_endpoint",
      "userinfo_endpoint",
      "jwks_uri",
      "end_session_endpoint",
    ]) {
      expect(String(doc[key])).toMatch(new RegExp(`^${services.idpUrl.replace(/\./g, "\\.")}/`));
    }
    expect(doc["code_challenge_methods_supported"]).toEqual(["S256"]);
    const jwks = (await (await fetch(String(doc["jwks_uri"]))).json()) as { keys: Array<Record<string, unknown>> };
    expect(jwks.keys[0]).toMatchObject({ kty: "RSA", alg: "RS256" });
    expect(jwks.keys[0]).not.toHaveProperty("d");
  });

  it("runs the authorization-code flow with PKCE and issues an id_token for the hinted e-mail", async () => {
    const { verifier, challenge } = pkcePair();
    const { code, location } = await signIn("Engineer@Owner.example", challenge, { nonce: "n-42" });
    expect(location.searchParams.get("state")).toBe("state-123");

    const { status, body } = await redeem(code, verifier);
    expect(status).toBe(200);
    expect(body["token_type"]).toBe("Bearer");
    expect(body["scope"]).toBe("openid email profile");
    const claims = await verifyIdToken(String(body["id_token"]));
    expect(claims).toMatchObject({
      iss: services.idpUrl,
      aud: CLIENT_ID,
      email: "engineer@owner.example",
      email_verified: true,
      name: demoUsers.find((u) => u.email === "engineer@owner.example")?.name,
      nonce: "n-42",
    });
    expect(claims.sub).toMatch(/^user-[0-9a-f]{20}$/);
    expect(typeof claims.exp).toBe("number");
    expect(typeof claims.iat).toBe("number");

    const access = decodeJwt(String(body["access_token"]));
    expect(access).toMatchObject({ sub: claims.sub, email: "engineer@owner.example", iss: services.idpUrl });

    const info = await fetch(`${services.idpUrl}/userinfo`, {
      headers: { Authorization: `Bearer ${body["access_token"]}` },
    });
    expect(info.status).toBe(200);
    expect(await info.json()).toEqual({
      sub: claims.sub,
      email: "engineer@owner.example",
      email_verified: true,
      name: claims.name,
    });
    const noToken = await fetch(`${services.idpUrl}/userinfo`, { headers: { Authorization: "Bearer nope" } });
    expect(noToken.status).toBe(401);
  });

  it("exchanges a refresh token once, for the same person", async () => {
    const { verifier, challenge } = pkcePair();
    const { code, location } = await signIn("engineer@owner2.example", challenge);
    expect(location.searchParams.get("iss")).toBe(services.idpUrl);
    const first = await redeem(code, verifier);
    const refresh = (token: unknown) =>
      fetch(`${services.idpUrl}/token`, {
        method: "POST",
        headers: {
          "Content-Type": "application/x-www-form-urlencoded",
          Authorization: `Basic ${Buffer.from(`${CLIENT_ID}:${CLIENT_SECRET}`).toString("base64")}`,
        },
        body: new URLSearchParams({ grant_type: "refresh_token", refresh_token: String(token) }),
      });
    const res = await refresh(first.body["refresh_token"]);
    expect(res.status).toBe(200);
    const body = (await res.json()) as Record<string, unknown>;
    expect((await verifyIdToken(String(body["id_token"]))).email).toBe("engineer@owner2.example");
    expect((await refresh(first.body["refresh_token"])).status).toBe(400);

    // An id_token is not an access token.
    const info = await fetch(`${services.idpUrl}/userinfo`, {
      headers: { Authorization: `Bearer ${body["id_token"]}` },
    });
    expect(info.status).toBe(401);
  });

  it("gives the same subject to the same e-mail on every sign-in", async () => {
    const subs: unknown[] = [];
    for (let i = 0; i < 2; i++) {
      const { verifier, challenge } = pkcePair();
      const { code } = await signIn("admin@owner.example", challenge);
      const { body } = await redeem(code, verifier);
      subs.push((await verifyIdToken(String(body["id_token"]))).sub);
    }
    expect(subs[0]).toBe(subs[1]);
  });

  it("reports unverified@owner.example as unverified", async () => {
    const { verifier, challenge } = pkcePair();
    const { code } = await signIn("unverified@owner.example", challenge);
    const { status, body } = await redeem(code, verifier);
    expect(status).toBe(200);
    const claims = await verifyIdToken(String(body["id_token"]));
    expect(claims.email).toBe("unverified@owner.example");
    expect(claims.email_verified).toBe(false);
  });

  it("signs in any address, naming it after the local part", async () => {
    const { verifier, challenge } = pkcePair();
    const { code } = await signIn("jo.van-dyke@contractor.example", challenge);
    const { body } = await redeem(code, verifier);
    const claims = await verifyIdToken(String(body["id_token"]));
    expect(claims).toMatchObject({
      email: "jo.van-dyke@contractor.example",
      email_verified: true,
      name: "Jo Van Dyke",
    });
  });

  it("refuses a replayed code", async () => {
    const { verifier, challenge } = pkcePair();
    const { code } = await signIn("manager@owner.example", challenge);
    expect((await redeem(code, verifier)).status).toBe(200);
    const replay = await redeem(code, verifier);
    expect(replay.status).toBe(400);
    expect(replay.body["error"]).toBe("invalid_grant");
  });

  it("refuses a wrong code_verifier, and the code is used up", async () => {
    const { verifier, challenge } = pkcePair();
    const { code } = await signIn("tech@monitoring.example", challenge);
    const wrong = await redeem(code, pkcePair().verifier);
    expect(wrong.status).toBe(400);
    expect(wrong.body["error"]).toBe("invalid_grant");
    expect((await redeem(code, verifier)).status).toBe(400);
  });

  it("refuses a code redeemed by another client", async () => {
    const { verifier, challenge } = pkcePair();
    const { code } = await signIn("tech@inspection.example", challenge);
    const other = await redeem(code, verifier, "someone-else");
    expect(other.status).toBe(400);
    expect(other.body["error"]).toBe("invalid_grant");
  });

  it("requires PKCE at the authorization endpoint", async () => {
    const res = await fetch(authorizeUrl({ login_hint: "admin@owner.example" }), { redirect: "manual" });
    expect(res.status).toBe(302);
    const location = new URL(res.headers.get("location") ?? "");
    expect(location.searchParams.get("error")).toBe("invalid_request");
    expect(location.searchParams.get("code")).toBeNull();
    expect(location.searchParams.get("state")).toBe("state-123");
  });

  it("shows a sign-in page listing the demo people when there is no login_hint", async () => {
    const { challenge } = pkcePair();
    const res = await fetch(authorizeUrl({ code_challenge: challenge, code_challenge_method: "S256" }));
    expect(res.status).toBe(200);
    expect(res.headers.get("content-type")).toMatch(/text\/html/);
    const html = await res.text();
    expect(html).toContain("Demo identity provider");
    for (const user of demoUsers) {
      expect(html).toContain(`value="${user.email}"`);
      expect(html).toContain(user.name);
    }
    // Choosing someone re-enters /authorize with the same request.
    expect(html).toContain('action="/authorize"');
    expect(html).toContain(`name="code_challenge" value="${challenge}"`);
    expect(html).toContain('name="state" value="state-123"');
    expect(html).toMatch(/<input type="email" id="login_hint" name="login_hint"/);
    expect(html).toContain('<label for="login_hint">');
  });

  it("turns away an authorization request without a usable redirect_uri", async () => {
    const res = await fetch(authorizeUrl({ redirect_uri: "not a url" }), { redirect: "manual" });
    expect(res.status).toBe(400);
  });
});

describe("S3", () => {
  it("stores and returns an object in the wallcast-files bucket", async () => {
    expect(services.s3Url).toMatch(/^http:\/\/127\.0\.0\.1:\d+$/);
    const s3 = new S3Client({
      endpoint: services.s3Url,
      region: "us-east-1",
      forcePathStyle: true,
      credentials: { accessKeyId: "S3RVER", secretAccessKey: "S3RVER" },
      requestChecksumCalculation: "WHEN_REQUIRED",
      responseChecksumValidation: "WHEN_REQUIRED",
    });
    const content = "coupon,mass_loss_g\nC-101,0.412\n";
    await s3.send(
      new PutObjectCommand({
        Bucket: "wallcast-files",
        Key: "uploads/coupons.csv",
        Body: content,
        ContentType: "text/csv",
      }),
    );
    const got = await s3.send(new GetObjectCommand({ Bucket: "wallcast-files", Key: "uploads/coupons.csv" }));
    expect(await got.Body?.transformToString()).toBe(content);
    expect(got.ContentType).toBe("text/csv");
    s3.destroy();
  });
});

describe("mail", () => {
  it("accepts a message from the resend SDK and lists it newest first", async () => {
    const resend = new Resend("re_test", { baseUrl: services.mailUrl });
    const first = await resend.emails.send({
      from: "Wallcast <no-reply@wallcast.example>",
      to: "engineer@owner.example",
      subject: "First",
      text: "one",
    });
    expect(first.error).toBeNull();
    const { data, error } = await resend.emails.send({
      from: "Wallcast <no-reply@wallcast.example>",
      to: ["admin@owner.example"],
      cc: "manager@owner.example",
      replyTo: "support@wallcast.example",
      subject: "You have been invited",
      html: "<p>Hello <a href='http://127.0.0.1:3000/'>sign in</a></p>",
      text: "Hello, sign in at http://127.0.0.1:3000/",
      tags: [{ name: "kind", value: "invitation" }],
    });
    expect(error).toBeNull();
    expect(data?.id).toMatch(/^[0-9a-f-]{36}$/);

    const list = (await (await fetch(`${services.mailUrl}/emails`)).json()) as { data: Array<Record<string, unknown>> };
    expect(list.data[0]).toMatchObject({
      id: data?.id,
      to: ["admin@owner.example"],
      cc: ["manager@owner.example"],
      reply_to: ["support@wallcast.example"],
      subject: "You have been invited",
    });
    expect(list.data[1]?.["subject"]).toBe("First");

    const one = await fetch(`${services.mailUrl}/emails/${data?.id}`);
    expect(((await one.json()) as Record<string, unknown>)["text"]).toBe("Hello, sign in at http://127.0.0.1:3000/");
    const filtered = (await (await fetch(`${services.mailUrl}/emails?to=engineer@owner.example`)).json()) as {
      data: unknown[];
    };
    expect(filtered.data).toHaveLength(1);

    const page = await (await fetch(`${services.mailUrl}/?id=${data?.id}`)).text();
    expect(page).toContain("You have been invited");
    expect(page).toMatch(/<iframe[^>]+sandbox="allow-popups allow-popups-to-escape-sandbox"/);

    const persisted = (await readFile(path.join(dataDir, "mail.jsonl"), "utf8")).trim().split("\n");
    expect(persisted.map((l) => (JSON.parse(l) as { id: string }).id)).toContain(data?.id);
  });

  it("reports a forced failure and a validation error in `error`", async () => {
    const resend = new Resend("re_test", { baseUrl: services.mailUrl });
    const hook = await fetch(`${services.mailUrl}/_fail-next`, {
      method: "POST",
      headers: { "Content-Type": "application/json" },
      body: JSON.stringify({ count: 1, status: 500 }),
    });
    expect(hook.status).toBe(200);
    const failed = await resend.emails.send({
      from: "a@wallcast.example",
      to: "b@owner.example",
      subject: "x",
      text: "x",
    });
    expect(failed.data).toBeNull();
    expect(failed.error).toMatchObject({ statusCode: 500, name: "application_error" });

    const ok = await resend.emails.send({ from: "a@wallcast.example", to: "b@owner.example", subject: "x", text: "x" });
    expect(ok.error).toBeNull();

    const invalid = await resend.emails.send({
      from: "a@wallcast.example",
      to: "b@owner.example",
      subject: "",
      text: "x",
    });
    expect(invalid.error).toMatchObject({ statusCode: 422 });

    const unauthenticated = await fetch(`${services.mailUrl}/emails`, {
      method: "POST",
      headers: { "Content-Type": "application/json" },
      body: JSON.stringify({ from: "a@wallcast.example", to: "b@owner.example", subject: "x" }),
    });
    expect(unauthenticated.status).toBe(401);
    expect(await unauthenticated.json()).toMatchObject({ statusCode: 401, name: "missing_api_key" });
  });

  it("keeps the inbox across a restart, and clears it on DELETE", async () => {
    const again = await startFakeServices({ dataDir, idpPort: 0, s3Port: 0, mailPort: 0, quiet: true });
    try {
      const before = (await (await fetch(`${again.mailUrl}/emails`)).json()) as { data: unknown[] };
      expect(before.data.length).toBeGreaterThanOrEqual(3);
      const cleared = await fetch(`${again.mailUrl}/emails`, { method: "DELETE" });
      expect(cleared.status).toBe(200);
      const after = (await (await fetch(`${again.mailUrl}/emails`)).json()) as { data: unknown[] };
      expect(after.data).toEqual([]);
      expect(await readFile(path.join(dataDir, "mail.jsonl"), "utf8")).toBe("");
    } finally {
      await again.stop();
    }
  });
});

describe("launcher", () => {
  it("prints one ready line, serves, and exits 0 on SIGTERM", async () => {
    const launchDir = await mkdtemp(path.join(os.tmpdir(), "wallcast-launch-"));
    const child = spawn(
      process.execPath,
      ["--import", "tsx", path.join(root, "fake-services", "launch.ts"), "--data-dir", launchDir, "--quiet"],
      {
        cwd: root,
        env: { ...process.env, FAKE_IDP_PORT: "0", FAKE_S3_PORT: "0", FAKE_MAIL_PORT: "0" },
        stdio: ["ignore", "pipe", "pipe"],
      },
    );
    try {
      let stdout = "";
      const ready = await new Promise<{ idpUrl: string; s3Url: string; mailUrl: string }>((resolve, reject) => {
        const timer = setTimeout(() => reject(new Error(`no ready line; stdout so far: ${stdout}`)), 20_000);
        child.stdout.setEncoding("utf8");
        child.stdout.on("data", (chunk: string) => {
          stdout += chunk;
          const m = /^FAKE_SERVICES_READY (.+)$/m.exec(stdout);
          if (m?.[1]) {
            clearTimeout(timer);
            resolve(JSON.parse(m[1]) as { idpUrl: string; s3Url: string; mailUrl: string });
          }
        });
        child.once("exit", (code) => {
          clearTimeout(timer);
          reject(new Error(`launcher exited early with ${code}`));
        });
      });
      expect(Object.keys(ready)).toEqual(["idpUrl", "s3Url", "mailUrl"]);
      const discovery = (await (await fetch(`${ready.idpUrl}/.well-known/openid-configuration`)).json()) as {
        issuer: string;
      };
      expect(discovery.issuer).toBe(ready.idpUrl);
      expect((await fetch(`${ready.mailUrl}/`)).status).toBe(200);

      const exited = new Promise<number | null>((resolve) => child.once("exit", (code) => resolve(code)));
      child.kill("SIGTERM");
      expect(await exited).toBe(0);
      expect(stdout.match(/FAKE_SERVICES_READY/g)).toHaveLength(1);
    } finally {
      if (child.exitCode === null) child.kill("SIGKILL");
      await rm(launchDir, { recursive: true, force: true });
    }
  });
});
