import { type RouteConfig, index, route } from "@react-router/dev/routes";

export default [
  index("routes/home.tsx"),
  route("healthz", "routes/healthz.ts"),

  // sign-in
  route("auth/login", "routes/auth.login.tsx"),
  route("auth/callback", "routes/auth.callback.tsx"),
  route("auth/logout", "routes/auth.logout.ts"),
  route("auth/no-access", "routes/auth.no-access.tsx"),

  route("profile", "routes/profile.tsx"),

  // administration (owner administrators; engineers may read contracts and the audit trail)
  route("admin/members", "routes/admin.members.tsx"),
  route("admin/api-clients", "routes/admin.api-clients.tsx"),
  route("contracts", "routes/contracts.tsx"),
  route("contracts/new", "routes/contracts.new.tsx"),
  route("contracts/:contractId", "routes/contracts.$contractId.tsx"),
  route("audit", "routes/audit.tsx"),
  route("audit.csv", "routes/audit[.]csv.ts"),
  route("sites", "routes/sites.tsx"),

  // owner set-up (integrity engineers and administrators)
  route("setup", "routes/setup.tsx"),
  route("setup/sites/:siteId", "routes/setup.sites.$siteId.tsx"),
  route("setup/sites/:siteId/import", "routes/setup.sites.$siteId.import.tsx"),
  route("setup/circuit-design-template.csv", "routes/setup.circuit-design-template[.]csv.ts"),
  route("setup/cml-template.csv", "routes/setup.cml-template[.]csv.ts"),
  route("setup/circuits/:circuitId", "routes/setup.circuits.$circuitId.tsx"),
  route("setup/points/:pointId", "routes/setup.points.$pointId.tsx"),
  route("setup/coupons", "routes/setup.coupons.tsx"),
  route("setup/coupons.csv", "routes/setup.coupons[.]csv.ts"),
  route("setup/settings", "routes/setup.settings.tsx"),

  // coupon work (contractor technicians record; owner staff read)
  route("pulls", "routes/pulls.tsx"),
  route("pulls/:pointId/exchange", "routes/pulls.$pointId.exchange.tsx"),
  route("lab/:exposureId", "routes/lab.$exposureId.tsx"),
  route("lab/:exposureId/attachments", "routes/lab.$exposureId.attachments.ts"),
  route("attachments/:attachmentId", "routes/attachments.$attachmentId.ts"),
  route("attachments/:attachmentId/thumbnail", "routes/attachments.$attachmentId.thumbnail.ts"),
  route("lab-import", "routes/lab-import.tsx"),
  route("lab-import/template.csv", "routes/lab-import.template[.]csv.ts"),
  route("submissions", "routes/submissions.tsx"),
  route("submissions/:submissionId", "routes/submissions.$submissionId.tsx"),
  route("packets/*", "routes/submissions-old-links.ts"),

  // thickness surveys (inspection contractors' technicians)
  route("surveys", "routes/surveys.tsx"),
  route("surveys/:submissionId", "routes/surveys.$submissionId.tsx"),
  route("surveys/:submissionId/import", "routes/surveys.$submissionId.import.tsx"),
  route("surveys/:submissionId/template.csv", "routes/surveys.$submissionId.template[.]csv.ts"),
  route("surveys/:submissionId/attachments", "routes/surveys.$submissionId.attachments.ts"),

  // the owner's review (integrity engineers decide; plant managers and administrators read)
  route("review", "routes/review.tsx"),
  route("review/:submissionId", "routes/review.$submissionId.tsx"),

  // JSON API (bearer token of an API client, or the session cookie; problem+json errors)
  route("api/v1/me", "routes/api.v1.me.ts"),
  route("api/v1/sites", "routes/api.v1.sites.ts"),
  route("api/v1/points", "routes/api.v1.points.ts"),
  route("api/v1/results", "routes/api.v1.results.ts"),
  route("api/v1/submissions", "routes/api.v1.submissions.ts"),
  route("api/v1/submissions/:submissionId", "routes/api.v1.submissions.$submissionId.ts"),
  route("api/v1/circuits", "routes/api.v1.circuits.ts"),
  route("api/v1/circuits/:circuitId", "routes/api.v1.circuits.$circuitId.ts"),
  route("api/v1/*", "routes/api.v1.splat.ts"),

  route("*", "routes/not-found.tsx"),
] satisfies RouteConfig;
