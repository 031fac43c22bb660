/**
 * Local OpenID Connect identity provider, built on oauth2-mock-server.
 *
 * The mock server supplies the key store, token signing, JWKS and the basic endpoints.
 * In front of it sits a thin layer of our own that makes it behave like a real provider
 * for the one flow Wallcast uses, the authorization-code flow with PKCE:
 *
 * - `GET /authorize` without `login_hint` shows a sign-in page listing the demo people and
 *   a free e-mail field; with `login_hint=<email>` it signs that address in (any address)
 *   and lets the mock redirect back with `code` and `state`.
 * - PKCE is required (S256 only). At the token endpoint a code is redeemed at most once,
 *   only by the client it was issued to, with the same redirect_uri and a verifier that
 *   matches the challenge; anything else is `400 invalid_grant`.
 * - Tokens and userinfo carry the signed-in person (`sub` stable per e-mail, `email`,
 *   `email_verified`, `name`) instead of the mock's fixed `johndoe`.
 * - The issuer is the 127.0.0.1 address the server really listens on (the mock would
 *   call itself `localhost`), and discovery advertises only what is backed here.
 *
 * Client authentication: any client id with any secret (HTTP Basic or form fields) is
 * accepted; the id_token audience is that client id.
 */
import { createHash } from "node:crypto";
import { createServer, type IncomingMessage, type Server, type ServerResponse } from "node:http";
import type { AddressInfo } from "node:net";
import { createLocalJWKSet, jwtVerify, type JSONWebKeySet } from "jose";
import {
  OAuth2Issuer,
  OAuth2Service,
  type MutableRedirectUri,
  type MutableResponse,
  type MutableToken,
} from "oauth2-mock-server";
import { demoUsers, unverifiedEmails } from "./demo-users.ts";
import { escapeHtml, renderPage } from "./html.ts";
import { closeServer, hostForUrl, listen, logRequests } from "./http-util.ts";

export interface IdpOptions {
  host: string;
  port: number;
  /** Called with one short line per request; omitted = silent. */
  log?: (line: string) => void;
}

export interface IdpHandle {
  url: string;
  server: Server;
  stop(): Promise<void>;
}

/** The person a sign-in stands for, as the tokens and userinfo describe them. */
export interface IdentityClaims {
  sub: string;
  email: string;
  email_verified: boolean;
  name: string;
}

const CODE_TTL_MS = 10 * 60 * 1000;
const MAX_BODY_BYTES = 64 * 1024;

interface SignIn {
  email: string;
  clientId: string;
  scope: string;
  authTime: number;
}

interface CodeRecord extends SignIn {
  redirectUri: string;
  codeChallenge: string;
  expiresAt: number;
}

class OAuthError extends Error {
  constructor(
    readonly status: number,
    readonly error: string,
    readonly description: string,
  ) {
    super(description);
  }
}

/** Lower-cases and trims an e-mail address; undefined when it does not look like one. */
export function normaliseEmail(value: string): string | undefined {
  const email = value.trim().toLowerCase();
  if (email.length > 254) return undefined;
  return /^[^\s@<>"(),;:\\]+@[^\s@<>"(),;:\\]+\.[^\s@<>"(),;:\\]+$/.test(email) ? email : undefined;
}

/** A stable subject identifier for an e-mail address. */
export function subjectForEmail(email: string): string {
  return `user-${createHash("sha256").update(email.toLowerCase()).digest("hex").slice(0, 20)}`;
}

/** The demo person's name, or one derived from the local part ("jane.doe@…" → "Jane Doe"). */
export function nameForEmail(email: string): string {
  const known = demoUsers.find((u) => u.email === email.toLowerCase());
  if (known) return known.name;
  const local = (email.split("@")[0] ?? "").split("+")[0] ?? "";
  const words = local
    .split(/[._-]+/)
    .filter(Boolean)
    .map((w) => w.charAt(0).toUpperCase() + w.slice(1));
  return words.length > 0 ? words.join(" ") : email;
}

export function identityForEmail(email: string): IdentityClaims {
  const normalised = email.toLowerCase();
  return {
    sub: subjectForEmail(normalised),
    email: normalised,
    email_verified: !unverifiedEmails.has(normalised),
    name: nameForEmail(normalised),
  };
}

function s256(verifier: string): string {
  return createHash("sha256").update(verifier).digest("base64url");
}

function isHttpUrl(value: string): boolean {
  try {
    const url = new URL(value);
    return (url.protocol === "http:" || url.protocol === "https:") && url.hash === "";
  } catch {
    return false;
  }
}

function sendJson(res: ServerResponse, status: number, body: unknown, headers: Record<string, string> = {}): void {
  const text = JSON.stringify(body);
  res.writeHead(status, {
    "Content-Type": "application/json; charset=utf-8",
    "Content-Length": Buffer.byteLength(text),
    "Access-Control-Allow-Origin": "*",
    ...headers,
  });
  res.end(text);
}

const pageHeaders = {
  "Content-Type": "text/html; charset=utf-8",
  "Cache-Control": "no-store",
  // No form-action: the sign-in form's redirect must be free to reach the app's callback.
  "Content-Security-Policy":
    "default-src 'none'; style-src 'unsafe-inline'; img-src data:; base-uri 'none'; frame-ancestors 'none'",
  "X-Content-Type-Options": "nosniff",
  "Referrer-Policy": "no-referrer",
};

function sendHtml(res: ServerResponse, status: number, html: string): void {
  res.writeHead(status, { ...pageHeaders, "Content-Length": Buffer.byteLength(html) });
  res.end(html);
}

function redirect(res: ServerResponse, location: string): void {
  res.writeHead(302, { Location: location, "Cache-Control": "no-store", "Content-Length": 0 });
  res.end();
}

async function readBody(req: IncomingMessage): Promise<string> {
  const chunks: Buffer[] = [];
  let size = 0;
  for await (const chunk of req) {
    const buf = Buffer.isBuffer(chunk) ? chunk : Buffer.from(chunk as string);
    size += buf.length;
    if (size > MAX_BODY_BYTES) throw new OAuthError(413, "invalid_request", "Request body too large");
    chunks.push(buf);
  }
  return Buffer.concat(chunks).toString("utf8");
}

/** The client a token request authenticates as: HTTP Basic first, then form fields. */
function clientIdOf(req: IncomingMessage, body: Record<string, string>): string | undefined {
  const header = req.headers.authorization;
  if (header && /^basic /i.test(header)) {
    const decoded = Buffer.from(header.slice(6).trim(), "base64").toString("utf8");
    const colon = decoded.indexOf(":");
    const id = colon >= 0 ? decoded.slice(0, colon) : decoded;
    return id.length > 0 ? id : undefined;
  }
  const id = body["client_id"];
  return id && id.length > 0 ? id : undefined;
}

function repeatedParam(params: URLSearchParams): string | undefined {
  for (const key of new Set(params.keys())) {
    if (params.getAll(key).length > 1) return key;
  }
  return undefined;
}

function hiddenInputs(params: URLSearchParams): string {
  return [...params.entries()]
    .filter(([key]) => key !== "login_hint")
    .map(([key, value]) => `<input type="hidden" name="${escapeHtml(key)}" value="${escapeHtml(value)}">`)
    .join("\n");
}

const pickerCss = `
.people { list-style: none; margin: 0; padding: 0; display: grid; gap: 0.5rem; }
.person { width: 100%; text-align: left; font: inherit; color: inherit; background: #fff; cursor: pointer;
  border: 1px solid var(--line); border-radius: 8px; padding: 0.7rem 0.85rem; display: grid; gap: 0.1rem; }
.person:hover { border-color: var(--accent); background: var(--accent-soft); }
.person-name { font-weight: 600; }
.person-email { font-family: ui-monospace, "SFMono-Regular", Menlo, Consolas, monospace; font-size: 0.875rem; color: var(--accent); }
.person-desc { font-size: 0.875rem; color: var(--muted); }
.row { display: flex; gap: 0.75rem; align-items: flex-end; flex-wrap: wrap; }
.row > div { flex: 1 1 16rem; }
`;

function renderPicker(params: URLSearchParams, error?: string, typed?: string): string {
  const hidden = hiddenInputs(params);
  const redirectUri = params.get("redirect_uri") ?? "";
  let returnTo = redirectUri;
  try {
    returnTo = new URL(redirectUri).origin;
  } catch {
    /* shown as given */
  }
  const people = demoUsers
    .map(
      (u) => `<li><button type="submit" class="person" name="login_hint" value="${escapeHtml(u.email)}">
<span class="person-name">${escapeHtml(u.name)}</span>
<span class="person-email">${escapeHtml(u.email)}</span>
<span class="person-desc">${escapeHtml(u.description)}</span>
</button></li>`,
    )
    .join("\n");
  const alert = error ? `<div class="alert" role="alert" id="email-error">${escapeHtml(error)}</div>` : "";
  const body = `<main>
<h1>Sign in</h1>
<p class="lead">Demo identity provider for Wallcast. Pick one of the demo people, or enter any e-mail address:
every address can sign in here, and Wallcast itself decides whether it gets access.</p>
${alert}
<section aria-labelledby="people-heading">
<h2 id="people-heading">Demo people</h2>
<form method="get" action="/authorize">
${hidden}
<ul class="people">
${people}
</ul>
</form>
</section>
<section aria-labelledby="other-heading">
<h2 id="other-heading">Another e-mail address</h2>
<form method="get" action="/authorize" class="card">
${hidden}
<div class="row">
<div>
<label for="login_hint">E-mail address</label>
<input type="email" id="login_hint" name="login_hint" required autocomplete="email" spellcheck="false"
  value="${escapeHtml(typed ?? "")}" aria-describedby="email-help${error ? " email-error" : ""}"${error ? ' aria-invalid="true"' : ""}>
</div>
<button type="submit" class="btn">Continue</button>
</div>
<p class="hint" id="email-help">For example someone an administrator has just invited.</p>
</form>
</section>
<p class="muted">After signing in you return to <span class="mono">${escapeHtml(returnTo)}</span>
(client <span class="mono">${escapeHtml(params.get("client_id") ?? "")}</span>).</p>
</main>`;
  return renderPage({
    title: "Sign in · Demo identity provider",
    band: "Demo identity provider",
    body,
    extraCss: pickerCss,
  });
}

function renderMessage(title: string, message: string): string {
  return renderPage({
    title: `${title} · Demo identity provider`,
    band: "Demo identity provider",
    body: `<main><h1>${escapeHtml(title)}</h1><div class="card"><p>${escapeHtml(message)}</p></div></main>`,
  });
}

export async function startIdp(opts: IdpOptions): Promise<IdpHandle> {
  const issuer = new OAuth2Issuer();
  await issuer.keys.generate("RS256");
  const service = new OAuth2Service(issuer);
  const delegate = service.requestHandler;

  const codes = new Map<string, CodeRecord>();
  const refreshTokens = new Map<string, SignIn>();
  // What our layer decided about a request, for the mock's hooks to apply.
  const pendingSignIns = new WeakMap<IncomingMessage, Omit<CodeRecord, "expiresAt">>();
  const tokenGrants = new WeakMap<IncomingMessage, SignIn>();
  const userinfoFor = new WeakMap<IncomingMessage, string>();

  service.on("beforeAuthorizeRedirect", (redirectUri: MutableRedirectUri, req: IncomingMessage) => {
    const code = redirectUri.url.searchParams.get("code");
    const pending = pendingSignIns.get(req);
    if (!code || !pending) return;
    // RFC 9207: name the issuer in the response, as the error redirects do.
    redirectUri.url.searchParams.set("iss", issuerUrl);
    const now = Date.now();
    for (const [key, rec] of codes) if (rec.expiresAt < now) codes.delete(key);
    codes.set(code, { ...pending, expiresAt: now + CODE_TTL_MS });
  });

  service.on("beforeTokenSigning", (token: MutableToken, req: IncomingMessage) => {
    const grant = tokenGrants.get(req);
    if (!grant) return;
    const who = identityForEmail(grant.email);
    const payload = token.payload;
    // The mock signs the access token first (it has a `scope`), then the id_token.
    const isAccessToken = typeof payload["scope"] === "string";
    if (isAccessToken) {
      Object.assign(payload, { ...who, scope: grant.scope, client_id: grant.clientId, aud: grant.clientId });
    } else {
      Object.assign(payload, { ...who, aud: grant.clientId, azp: grant.clientId, auth_time: grant.authTime });
    }
  });

  service.on("beforeResponse", (response: MutableResponse, req: IncomingMessage) => {
    const grant = tokenGrants.get(req);
    if (!grant || response.statusCode !== 200 || response.body === "") return;
    response.body["scope"] = grant.scope;
    const refresh = response.body["refresh_token"];
    if (typeof refresh === "string") refreshTokens.set(refresh, grant);
  });

  service.on("beforeUserinfo", (response: MutableResponse, req: IncomingMessage) => {
    const email = userinfoFor.get(req);
    if (!email) {
      response.statusCode = 401;
      response.body = { error: "invalid_token" };
      return;
    }
    response.body = { ...identityForEmail(email) };
  });

  let issuerUrl = "";

  const discovery = () => ({
    issuer: issuerUrl,
    authorization_endpoint: `${issuerUrl}/authorize`,
    token_endpoint: `${issuerUrl}/token`,
    userinfo_endpoint: `${issuerUrl}/userinfo`,
    jwks_uri: `${issuerUrl}/jwks`,
    end_session_endpoint: `${issuerUrl}/endsession`,
    scopes_supported: ["openid", "email", "profile"],
    response_types_supported: ["code"],
    response_modes_supported: ["query"],
    grant_types_supported: ["authorization_code", "refresh_token"],
    subject_types_supported: ["public"],
    id_token_signing_alg_values_supported: ["RS256"],
    token_endpoint_auth_methods_supported: ["client_secret_basic", "client_secret_post", "none"],
    code_challenge_methods_supported: ["S256"],
    authorization_response_iss_parameter_supported: true,
    claims_supported: [
      "sub",
      "iss",
      "aud",
      "exp",
      "iat",
      "auth_time",
      "nonce",
      "azp",
      "email",
      "email_verified",
      "name",
    ],
  });

  function authorize(req: IncomingMessage, res: ServerResponse, params: URLSearchParams): void {
    const repeated = repeatedParam(params);
    if (repeated) {
      sendHtml(
        res,
        400,
        renderMessage("Sign-in request refused", `The parameter "${repeated}" was given more than once.`),
      );
      return;
    }
    const clientId = params.get("client_id");
    const redirectUri = params.get("redirect_uri");
    if (!clientId) {
      sendHtml(res, 400, renderMessage("Sign-in request refused", "The request names no client_id."));
      return;
    }
    if (!redirectUri || !isHttpUrl(redirectUri)) {
      sendHtml(res, 400, renderMessage("Sign-in request refused", "The request has no valid absolute redirect_uri."));
      return;
    }
    const refuse = (error: string, description: string) => {
      const url = new URL(redirectUri);
      url.searchParams.set("error", error);
      url.searchParams.set("error_description", description);
      const state = params.get("state");
      if (state) url.searchParams.set("state", state);
      url.searchParams.set("iss", issuerUrl);
      redirect(res, url.href);
    };
    if (params.get("response_type") !== "code") {
      refuse("unsupported_response_type", "Only response_type=code is supported.");
      return;
    }
    const scope = params.get("scope") ?? "";
    if (!scope.split(" ").includes("openid")) {
      refuse("invalid_scope", "The scope must include openid.");
      return;
    }
    const challenge = params.get("code_challenge");
    if (!challenge || params.get("code_challenge_method") !== "S256" || !/^[A-Za-z0-9_-]{43}$/.test(challenge)) {
      refuse("invalid_request", "PKCE is required: send a code_challenge with code_challenge_method=S256.");
      return;
    }
    const hint = params.get("login_hint");
    if (hint === null || hint.trim() === "") {
      if ((params.get("prompt") ?? "").split(" ").includes("none")) {
        refuse("login_required", "Nobody is signed in; choose a person on the sign-in page.");
        return;
      }
      sendHtml(res, 200, renderPicker(params));
      return;
    }
    const email = normaliseEmail(hint);
    if (!email) {
      sendHtml(res, 400, renderPicker(params, `“${hint}” is not an e-mail address.`, hint));
      return;
    }
    pendingSignIns.set(req, {
      email,
      clientId,
      scope,
      authTime: Math.floor(Date.now() / 1000),
      redirectUri,
      codeChallenge: challenge,
    });
    // The mock issues the code and redirects; beforeAuthorizeRedirect records it.
    delegate(req, res);
  }

  async function token(req: IncomingMessage, res: ServerResponse): Promise<void> {
    const type = (req.headers["content-type"] ?? "").split(";")[0]?.trim().toLowerCase();
    if (type !== "application/x-www-form-urlencoded") {
      throw new OAuthError(400, "invalid_request", "The token request must be application/x-www-form-urlencoded.");
    }
    const params = new URLSearchParams(await readBody(req));
    const repeated = repeatedParam(params);
    if (repeated) throw new OAuthError(400, "invalid_request", `The parameter "${repeated}" was given more than once.`);
    const body = Object.fromEntries(params) as Record<string, string>;
    const clientId = clientIdOf(req, body);
    if (!clientId)
      throw new OAuthError(401, "invalid_client", "Client authentication is required (HTTP Basic or client_id).");

    let grant: SignIn;
    switch (body["grant_type"]) {
      case "authorization_code": {
        const code = body["code"] ?? "";
        const record = codes.get(code);
        // Any redemption attempt uses the code up, successful or not.
        codes.delete(code);
        if (!record || record.expiresAt < Date.now()) {
          throw new OAuthError(400, "invalid_grant", "The code is unknown, expired or already used.");
        }
        if (record.clientId !== clientId)
          throw new OAuthError(400, "invalid_grant", "The code was issued to another client.");
        if (body["redirect_uri"] !== record.redirectUri) {
          throw new OAuthError(400, "invalid_grant", "The redirect_uri does not match the authorization request.");
        }
        const verifier = body["code_verifier"] ?? "";
        if (!/^[A-Za-z0-9\-._~]{43,128}$/.test(verifier) || s256(verifier) !== record.codeChallenge) {
          throw new OAuthError(400, "invalid_grant", "The code_verifier does not match the code_challenge.");
        }
        grant = { email: record.email, clientId: record.clientId, scope: record.scope, authTime: record.authTime };
        break;
      }
      case "refresh_token": {
        const refresh = body["refresh_token"] ?? "";
        const record = refreshTokens.get(refresh);
        refreshTokens.delete(refresh);
        if (!record) throw new OAuthError(400, "invalid_grant", "The refresh token is unknown or already used.");
        if (record.clientId !== clientId)
          throw new OAuthError(400, "invalid_grant", "The refresh token belongs to another client.");
        grant = record;
        break;
      }
      default:
        throw new OAuthError(
          400,
          "unsupported_grant_type",
          "Supported grant types: authorization_code, refresh_token.",
        );
    }
    body["scope"] = grant.scope;
    // The mock's own body parser skips a request whose body has been read already.
    (req as IncomingMessage & { body?: unknown }).body = body;
    tokenGrants.set(req, grant);
    delegate(req, res);
  }

  async function userinfo(req: IncomingMessage, res: ServerResponse): Promise<void> {
    const header = req.headers.authorization ?? "";
    const match = /^bearer\s+(\S+)$/i.exec(header);
    const challenge = { "WWW-Authenticate": 'Bearer error="invalid_token"' };
    if (!match?.[1]) {
      sendJson(
        res,
        401,
        { error: "invalid_token", error_description: "A bearer access token is required." },
        challenge,
      );
      return;
    }
    try {
      const jwks = createLocalJWKSet({ keys: issuer.keys.toJSON() } as JSONWebKeySet);
      const { payload } = await jwtVerify(match[1], jwks, { issuer: issuerUrl, algorithms: ["RS256"] });
      // Only access tokens carry a scope; an id_token is not accepted here.
      if (typeof payload["scope"] !== "string" || typeof payload["email"] !== "string")
        throw new Error("not an access token");
      userinfoFor.set(req, payload["email"]);
    } catch {
      sendJson(
        res,
        401,
        { error: "invalid_token", error_description: "The access token is invalid or expired." },
        challenge,
      );
      return;
    }
    delegate(req, res);
  }

  /**
   * RP-initiated logout: a return address (post_logout_redirect_uri) is followed only
   * when the request says which client asks, by client_id or by an id_token_hint this
   * provider signed (whose audience must be that client_id when both are given).
   */
  async function endSession(req: IncomingMessage, res: ServerResponse, params: URLSearchParams): Promise<void> {
    const target = params.get("post_logout_redirect_uri");
    if (target && isHttpUrl(target) && !repeatedParam(params)) {
      const clientId = params.get("client_id");
      const hint = params.get("id_token_hint");
      let hintAudience: string | undefined;
      if (hint) {
        try {
          const jwks = createLocalJWKSet({ keys: issuer.keys.toJSON() } as JSONWebKeySet);
          // An expired id_token still names who signs out.
          const { payload } = await jwtVerify(hint, jwks, {
            issuer: issuerUrl,
            algorithms: ["RS256"],
            clockTolerance: 365 * 24 * 3600,
          });
          hintAudience = typeof payload.aud === "string" ? payload.aud : payload.aud?.[0];
        } catch {
          sendHtml(res, 400, renderMessage("Sign-out refused", "The id_token_hint was not issued by this provider."));
          return;
        }
      }
      if (!clientId && !hintAudience) {
        sendHtml(
          res,
          400,
          renderMessage("Sign-out refused", "A return address needs the client_id or an id_token_hint."),
        );
        return;
      }
      if (clientId && hintAudience && clientId !== hintAudience) {
        sendHtml(res, 400, renderMessage("Sign-out refused", "The id_token_hint was issued to another client."));
        return;
      }
      delegate(req, res);
      return;
    }
    sendHtml(
      res,
      200,
      renderMessage("Signed out", "You are signed out of the demo identity provider. You can close this page."),
    );
  }

  async function handle(req: IncomingMessage, res: ServerResponse): Promise<void> {
    const url = new URL(req.url ?? "/", "http://idp.invalid");
    const path = url.pathname.length > 1 ? url.pathname.replace(/\/+$/, "") : url.pathname;
    const method = req.method ?? "GET";
    try {
      if (method === "GET" && path === "/.well-known/openid-configuration") {
        sendJson(res, 200, discovery());
      } else if (method === "GET" && path === "/authorize") {
        authorize(req, res, url.searchParams);
      } else if (method === "POST" && path === "/token") {
        res.setHeader("Cache-Control", "no-store");
        await token(req, res);
      } else if (method === "GET" && path === "/userinfo") {
        await userinfo(req, res);
      } else if (method === "GET" && path === "/endsession") {
        await endSession(req, res, url.searchParams);
      } else if (method === "GET" && path === "/") {
        sendHtml(
          res,
          200,
          renderPage({
            title: "Demo identity provider",
            band: "Demo identity provider",
            body: `<main><h1>Demo identity provider</h1><div class="card"><p>Issuer <span class="mono">${escapeHtml(issuerUrl)}</span>.</p>
<p><a href="/.well-known/openid-configuration">OpenID configuration</a> · <a href="/jwks">Signing keys</a></p></div></main>`,
          }),
        );
      } else {
        delegate(req, res);
      }
    } catch (err) {
      if (res.headersSent) {
        res.destroy();
        return;
      }
      if (err instanceof OAuthError) {
        const headers: Record<string, string> = { "Cache-Control": "no-store" };
        if (err.status === 401) headers["WWW-Authenticate"] = 'Basic realm="wallcast-demo-idp"';
        sendJson(res, err.status, { error: err.error, error_description: err.description }, headers);
        return;
      }
      opts.log?.(`[idp] error: ${err instanceof Error ? err.message : String(err)}`);
      sendJson(res, 500, {
        error: "server_error",
        error_description: "Unexpected error in the demo identity provider.",
      });
    }
  }

  const server = createServer((req, res) => {
    void handle(req, res);
  });
  if (opts.log) logRequests(server, "idp", opts.log);
  await listen(server, opts.port, opts.host);
  const { port } = server.address() as AddressInfo;
  issuerUrl = `http://${hostForUrl(opts.host)}:${port}`;
  // The mock names this URL as `iss` in every token it signs.
  issuer.url = issuerUrl;

  return {
    url: issuerUrl,
    server,
    stop: () => closeServer(server),
  };
}
