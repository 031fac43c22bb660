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
 */
export type Identity = { subject: string; email: string; emailVerified: boolean; name: string };

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

/** Adds `login_hint` from our /auth/login URL to the provider's authorization request. */
class OidcStrategy extends OAuth2Strategy<Identity> {
  name = "oidc";
  protected authorizationParams(params: URLSearchParams, request: Request): URLSearchParams {
    const next = new URLSearchParams(params);
    const hint = new URL(request.url).searchParams.get("login_hint");
    if (hint && hint.length <= 320) next.set("login_hint", hint);
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
        name: "wallcast_oidc",
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
    async ({ tokens }) => {
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

export async function endSessionUrl(): Promise<string | undefined> {
  try {
    return (await getProvider()).discovery.end_session_endpoint;
  } catch {
    return undefined;
  }
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

/** Clears the strategy's state cookie once the callback has used it. */
export function clearOidcStateCookie(): string {
  return `wallcast_oidc=; Path=/auth; Max-Age=0; HttpOnly; SameSite=Lax`;
}
