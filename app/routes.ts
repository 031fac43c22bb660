import { type RouteConfig, index, route } from "@react-router/dev/routes";

export default [
  index("routes/home.tsx"),
  route("healthz", "routes/healthz.ts"),

  // sign-in
  route("auth/login", "routes/auth.login.ts"),
  route("auth/callback", "routes/auth.callback.tsx"),
  route("auth/logout", "routes/auth.logout.ts"),
  route("auth/no-access", "routes/auth.no-access.tsx"),

  route("profile", "routes/profile.tsx"),
  route("sites", "routes/sites.tsx"),

  // JSON API (session cookie; problem+json errors)
  route("api/v1/me", "routes/api.v1.me.ts"),
  route("api/v1/*", "routes/api.v1.splat.ts"),

  route("*", "routes/not-found.tsx"),
] satisfies RouteConfig;
