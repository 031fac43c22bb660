import { createHmac, timingSafeEqual } from "node:crypto";
import { createRemoteJWKSet, jwtVerify, type JWTPayload } from "jose";
import { createCookie } from "react-router";
import { Authenticator } from "remix-auth";
import { OAuth2Strategy } from "remix-auth-oauth2";
import { env } from "./env.server";

/**
 * OpenID Connect sign-in (authorization code + PKCE) through remix-auth and its OAuth2
 * strategy. remix-auth keeps no session and does not check the id_token, so this
 * module verifies the id_token itself with jose (signature against the issuer's JWKS,
 * issuer, audience, expiry) and falls back to the userinfo endpoint for claims the
 * id_token lacks. The provider's endpoints are discovered at the first sign-in and
 * re-discovered later if the provider was not reachable, so the app starts (and
 * /healthz answers) while the provider is down.
 *
 * The authorization request carries a `nonce` derived from its `state` (an HMAC with the
 * first session secret); the id_token must carry the same one, so an id_token minted for
 * another sign-in is refused. The strategy keeps state and PKCE verifier in a cookie
 * named `wallcast_oidc:<random id>` (remix-auth-oauth2 adds the suffix per sign-in);
 * `clearOidcStateCookies` clears the one the callback used.
 */
export type Identity = { issuer: string; subject: string; email: string; emailVerified: boolean; name: string };

const stateCookieName = "wallcast_oidc";

/** The nonce a sign-in with this state sends, under each session secret (the first signs). */
function noncesFor(state: string): string[] {
  return env().SESSION_SECRETS.map((secret) =>
    createHmac("sha256", secret).update(`oidc-nonce:${state}`).digest("base64url"),
  );
}

/** Whether the id_token's nonce is the one this sign-in's state sent. */
export function nonceMatches(state: string | null, nonce: unknown): boolean {
  if (!state || typeof nonce !== "string") return false;
  const given = Buffer.from(nonce);
  return noncesFor(state).some((n) => {
    const expected = Buffer.from(n);
    return expected.length === given.length && timingSafeEqual(expected, given);
  });
}

type Discovery = {
  issuer: string;
  authorization_endpoint: string;
  token_endpoint: string;
  userinfo_endpoint?: string;
  jwks_uri: string;
  end_session_endpoint?: string;
};

export class IdentityProviderUnavailable extends Error {}
export class SignInRejected extends Error {}

/** Adds `login_hint` from our /auth/login URL and the state's nonce to the provider's authorization request. */
class OidcStrategy extends OAuth2Strategy<Identity> {
  name = "oidc";
  protected authorizationParams(params: URLSearchParams, request: Request): URLSearchParams {
    const next = new URLSearchParams(params);
    const hint = new URL(request.url).searchParams.get("login_hint");
    if (hint && hint.length <= 320) next.set("login_hint", hint);
    const state = next.get("state");
    if (state) next.set("nonce", noncesFor(state)[0]);
    return next;
  }
}

type Provider = { discovery: Discovery; authenticator: Authenticator<Identity> };
let provider: Promise<Provider> | undefined;

async function discover(): Promise<Provider> {
  const e = env();
  const issuer = e.OIDC_ISSUER.replace(/\/$/, "");
  let discovery: Discovery;
  try {
    const res = await fetch(`${issuer}/.well-known/openid-configuration`, { signal: AbortSignal.timeout(5000) });
    if (!res.ok) throw new Error(`HTTP ${res.status}`);
    discovery = (await res.json()) as Discovery;
  } catch (error) {
    throw new IdentityProviderUnavailable(
      `the identity provider at ${issuer} did not answer (${(error as Error).message})`,
    );
  }
  if (discovery.issuer.replace(/\/$/, "") !== issuer) {
    throw new IdentityProviderUnavailable(`the identity provider calls itself ${discovery.issuer}, not ${issuer}`);
  }
  const jwks = createRemoteJWKSet(new URL(discovery.jwks_uri));
  const strategy = new OidcStrategy(
    {
      cookie: {
        name: stateCookieName,
        path: "/auth",
        httpOnly: true,
        sameSite: "Lax",
        ...(e.APP_ORIGIN.startsWith("https://") ? { secure: true } : {}),
      },
      clientId: e.OIDC_CLIENT_ID,
      clientSecret: e.OIDC_CLIENT_SECRET,
      authorizationEndpoint: discovery.authorization_endpoint,
      tokenEndpoint: discovery.token_endpoint,
      redirectURI: e.OIDC_REDIRECT_URI,
      scopes: ["openid", "email", "profile"],
    },
    async ({ tokens, request }) => {
      let claims: JWTPayload;
      try {
        ({ payload: claims } = await jwtVerify(tokens.idToken(), jwks, {
          issuer: discovery.issuer,
          audience: e.OIDC_CLIENT_ID,
          algorithms: ["RS256", "ES256", "PS256", "EdDSA"],
        }));
      } catch (error) {
        throw new SignInRejected(`the identity token was not accepted (${(error as Error).message})`);
      }
      if (typeof claims.sub !== "string" || !claims.sub) throw new SignInRejected("the identity token has no subject");
      if (!nonceMatches(new URL(request.url).searchParams.get("state"), claims.nonce))
        throw new SignInRejected("the identity token was issued for another sign-in (nonce)");
      let email = typeof claims.email === "string" ? claims.email : undefined;
      let verified = typeof claims.email_verified === "boolean" ? claims.email_verified : undefined;
      let name = typeof claims.name === "string" ? claims.name : undefined;
      if ((email === undefined || verified === undefined || name === undefined) && discovery.userinfo_endpoint) {
        const res = await fetch(discovery.userinfo_endpoint, {
          headers: { Authorization: `Bearer ${tokens.accessToken()}` },
          signal: AbortSignal.timeout(5000),
        });
        if (res.ok) {
          const info = (await res.json()) as Record<string, unknown>;
          if (info.sub !== claims.sub) throw new SignInRejected("the userinfo answer is for another subject");
          email ??= typeof info.email === "string" ? info.email : undefined;
          verified ??= typeof info.email_verified === "boolean" ? info.email_verified : undefined;
          name ??= typeof info.name === "string" ? info.name : undefined;
        }
      }
      if (!email) throw new SignInRejected("the identity provider did not share an e-mail address");
      return {
        issuer: discovery.issuer,
        subject: claims.sub,
        email: email.trim().toLowerCase(),
        emailVerified: verified === true,
        name: name ?? "",
      };
    },
  );
  const authenticator = new Authenticator<Identity>();
  authenticator.use(strategy, "oidc");
  return { discovery, authenticator };
}

async function getProvider(): Promise<Provider> {
  provider ??= discover().catch((error) => {
    provider = undefined; // try again at the next sign-in
    throw error;
  });
  return provider;
}

/**
 * Starts the sign-in (throws the redirect to the provider) or, on the callback, returns
 * the verified identity. Errors: IdentityProviderUnavailable, SignInRejected, or the
 * strategy's own (forged state, replayed code…).
 */
export async function authenticate(request: Request): Promise<Identity> {
  const { authenticator } = await getProvider();
  return authenticator.authenticate("oidc", request);
}

/**
 * Where sign-out sends the browser to end the provider's session too (RP-initiated
 * logout), when the provider's discovery document names an end_session_endpoint: with
 * our client_id and the app's start page as post_logout_redirect_uri. Undefined when the
 * provider has none or cannot be reached (sign-out then ends only our session).
 */
export async function endSessionUrl(): Promise<string | undefined> {
  let endpoint: string | undefined;
  try {
    endpoint = (await getProvider()).discovery.end_session_endpoint;
  } catch {
    return undefined;
  }
  if (!endpoint) return undefined;
  const e = env();
  const url = new URL(endpoint);
  url.searchParams.set("client_id", e.OIDC_CLIENT_ID);
  url.searchParams.set("post_logout_redirect_uri", `${e.APP_ORIGIN}/`);
  return url.href;
}

/** Where to go after signing in; kept in its own short-lived cookie during the round trip. */
let returnCookie: ReturnType<typeof createCookie> | undefined;
export function returnToCookie() {
  const e = env();
  returnCookie ??= createCookie("wallcast_return", {
    httpOnly: true,
    sameSite: "lax",
    path: "/auth",
    maxAge: 600,
    secure: e.APP_ORIGIN.startsWith("https://"),
    secrets: e.SESSION_SECRETS,
  });
  return returnCookie;
}

/**
 * Set-Cookie lines that clear the strategy's state cookie this callback used: the one
 * (`wallcast_oidc:<id>`) whose stored state is the state in the callback's URL. Other
 * sign-ins started in other tabs keep theirs.
 */
export function clearOidcStateCookies(request: Request): string[] {
  const state = new URL(request.url).searchParams.get("state");
  if (!state) return [];
  const secure = env().APP_ORIGIN.startsWith("https://") ? "; Secure" : "";
  const cleared: string[] = [];
  for (const pair of (request.headers.get("Cookie") ?? "").split(";")) {
    const eq = pair.indexOf("=");
    if (eq < 0) continue;
    const name = pair.slice(0, eq).trim();
    if (!name.startsWith(`${stateCookieName}:`)) continue;
    let value: string;
    try {
      value = decodeURIComponent(pair.slice(eq + 1).trim());
    } catch {
      value = "";
    }
    if (new URLSearchParams(value).get("state") === state)
      cleared.push(`${name}=; Path=/auth; Max-Age=0; HttpOnly; SameSite=Lax${secure}`);
  }
  return cleared;
}
