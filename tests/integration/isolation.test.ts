/**
 * The isolation matrix: every route of the production build × every kind of caller →
 * the status the caller must get. Own tenant, a foreign owner's engineer, a contractor
 * with the wrong scope, a contractor whose contract ended yesterday, and signed-out.
 * A route that exists in the build but not in this matrix fails the first test.
 */
import type { Express } from "express";
import request from "supertest";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { recordExchange } from "../../app/models/exposures.server";
import { saveLabResult } from "../../app/models/lab-results.server";
import { submitForReview } from "../../app/models/submissions.server";
import { startSurvey } from "../../app/models/thickness-surveys.server";
import { loadBuild } from "../../server";
import { productionApp, shutdownApp } from "../helpers/app";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, type World } from "../helpers/fixtures";
import { sessionCookieFor } from "../helpers/session";
import { outcomeOf } from "../helpers/outcome";
import { cml } from "../helpers/survey-world";

const callers = ["anon", "admin", "engineer", "manager", "tech", "inspector", "lapsed", "foreign"] as const;
type Caller = (typeof callers)[number];
type Statuses = Record<Caller, number>;

/** Shorthands for common rows. */
const all = (s: number): Statuses => Object.fromEntries(callers.map((c) => [c, s])) as Statuses;
const signedIn = (s: number, anon = 302): Statuses => ({ ...all(s), anon });
const owners = (own: number, others: number, foreign = own, anon = 302): Statuses => ({
  anon,
  admin: own,
  engineer: own,
  manager: own,
  tech: others,
  inspector: others,
  lapsed: others,
  foreign,
});
const setupRole = (own: number, foreign = own): Statuses => ({
  anon: 302,
  admin: own,
  engineer: own,
  manager: 403,
  tech: 403,
  inspector: 403,
  lapsed: 403,
  foreign,
});
const adminOnly = (own: number, foreign = 403): Statuses => ({ ...all(403), anon: 302, admin: own, foreign });

type Ids = {
  site: string;
  point: string;
  exposure: string;
  submission: string;
  survey: string;
  contract: string;
  circuit: string;
  missing: string;
};
/** Pages of thickness surveys: the inspection contractor's technicians only; other contractors' do not see the survey. */
const surveyPage = (inspector: number, tech = 404, lapsed = 404): Statuses => ({
  ...all(403),
  anon: 302,
  inspector,
  tech,
  lapsed,
});
type Row = { path: (ids: Ids) => string; get: Statuses; post?: Statuses };

const matrix: Record<string, Row> = {
  "routes/home": { path: () => "/", get: all(200) },
  "routes/healthz": { path: () => "/healthz", get: all(200) },
  "routes/auth.login": { path: () => "/auth/login", get: all(302) },
  "routes/auth.callback": { path: () => "/auth/callback", get: all(302) },
  "routes/auth.logout": { path: () => "/auth/logout", get: all(302), post: all(302) },
  "routes/auth.no-access": { path: () => "/auth/no-access", get: all(403) },
  "routes/profile": { path: () => "/profile", get: signedIn(200), post: signedIn(400) },
  "routes/sites": { path: () => "/sites", get: signedIn(200) },
  "routes/admin.members": { path: () => "/admin/members", get: adminOnly(200), post: adminOnly(400) },
  "routes/admin.api-clients": { path: () => "/admin/api-clients", get: adminOnly(200), post: adminOnly(400) },
  "routes/contracts": { path: () => "/contracts", get: { ...setupRole(200), manager: 403 } },
  "routes/contracts.new": { path: () => "/contracts/new", get: adminOnly(200), post: adminOnly(400) },
  "routes/contracts.$contractId": {
    path: (i) => `/contracts/${i.contract}`,
    get: { ...setupRole(200, 404) },
    // the other owner's engineer is refused by role before the id is looked at
    post: { ...adminOnly(400, 403), engineer: 403 },
  },
  "routes/audit": { path: () => "/audit", get: setupRole(200) },
  "routes/audit[.]csv": { path: () => "/audit.csv", get: setupRole(200) },
  "routes/setup": { path: () => "/setup", get: setupRole(200), post: setupRole(400) },
  "routes/setup.sites.$siteId": {
    path: (i) => `/setup/sites/${i.site}`,
    get: setupRole(200, 404),
    post: setupRole(400, 404),
  },
  "routes/setup.circuits.$circuitId": {
    path: (i) => `/setup/circuits/${i.circuit}`,
    // contractors are told nothing is there; a plant manager may not set up
    get: { ...setupRole(200, 404), tech: 404, inspector: 404, lapsed: 404 },
    post: { ...setupRole(400, 404), tech: 404, inspector: 404, lapsed: 404 },
  },
  "routes/setup.sites.$siteId.import": {
    path: (i) => `/setup/sites/${i.site}/import`,
    get: setupRole(200, 404),
    post: setupRole(400, 404),
  },
  "routes/setup.circuit-design-template[.]csv": {
    path: () => "/setup/circuit-design-template.csv",
    get: setupRole(200),
  },
  "routes/setup.cml-template[.]csv": { path: () => "/setup/cml-template.csv", get: setupRole(200) },
  "routes/setup.points.$pointId": {
    path: (i) => `/setup/points/${i.point}`,
    get: setupRole(200, 404),
    post: setupRole(400, 404),
  },
  "routes/setup.coupons": { path: () => "/setup/coupons", get: setupRole(200), post: setupRole(400) },
  "routes/setup.coupons[.]csv": { path: () => "/setup/coupons.csv", get: setupRole(200) },
  "routes/setup.settings": { path: () => "/setup/settings", get: setupRole(200), post: setupRole(400) },
  "routes/pulls": { path: () => "/pulls", get: signedIn(200) },
  "routes/pulls.$pointId.exchange": {
    path: (i) => `/pulls/${i.point}/exchange`,
    get: { ...owners(403, 0, 403), tech: 200, inspector: 403, lapsed: 404 },
    post: { ...owners(403, 0, 403), tech: 400, inspector: 403, lapsed: 404 },
  },
  "routes/lab.$exposureId": {
    path: (i) => `/lab/${i.exposure}`,
    get: { ...owners(403, 0, 404), tech: 200, inspector: 404, lapsed: 404 },
    post: {
      ...owners(403, 0, 404),
      tech: 409 /* its results are in a submission already sent */,
      inspector: 404,
      lapsed: 404,
    },
  },
  "routes/lab.$exposureId.attachments": {
    path: (i) => `/lab/${i.exposure}/attachments`,
    get: { ...owners(200, 0, 404, 401), tech: 200, inspector: 404, lapsed: 404 },
  },
  "routes/attachments.$attachmentId": { path: (i) => `/attachments/${i.missing}`, get: { ...all(404), anon: 302 } },
  "routes/attachments.$attachmentId.thumbnail": {
    path: (i) => `/attachments/${i.missing}/thumbnail`,
    get: { ...all(404), anon: 302 },
  },
  "routes/lab-import": {
    path: () => "/lab-import",
    get: { ...owners(403, 200, 403) },
    post: { ...owners(403, 400, 403) },
  },
  "routes/lab-import.template[.]csv": { path: () => "/lab-import/template.csv", get: { ...owners(403, 200, 403) } },
  "routes/submissions": { path: () => "/submissions", get: signedIn(200) },
  "routes/submissions-old-links": { path: (i) => `/packets/${i.submission}`, get: signedIn(301, 301) },
  "routes/submissions.$submissionId": {
    path: (i) => `/submissions/${i.submission}`,
    get: { ...owners(302, 0, 404), tech: 200, inspector: 404, lapsed: 404 },
    post: { ...owners(403, 0, 404), tech: 400, inspector: 404, lapsed: 404 },
  },
  "routes/surveys": { path: () => "/surveys", get: surveyPage(200, 403, 403), post: surveyPage(400, 403, 403) },
  "routes/surveys.$submissionId": {
    path: (i) => `/surveys/${i.survey}`,
    get: surveyPage(200),
    post: surveyPage(400),
  },
  "routes/surveys.$submissionId.import": {
    path: (i) => `/surveys/${i.survey}/import`,
    get: surveyPage(200),
    post: surveyPage(400),
  },
  "routes/surveys.$submissionId.template[.]csv": {
    path: (i) => `/surveys/${i.survey}/template.csv`,
    get: surveyPage(200),
  },
  "routes/surveys.$submissionId.attachments": {
    path: (i) => `/surveys/${i.survey}/attachments`,
    get: { ...surveyPage(200), anon: 401 },
  },
  "routes/review": { path: () => "/review", get: owners(200, 403) },
  "routes/review.$submissionId": {
    path: (i) => `/review/${i.submission}`,
    get: owners(200, 403, 404),
    post: { ...owners(403, 403, 404), engineer: 400 },
  },
  "routes/api.v1.me": { path: () => "/api/v1/me", get: signedIn(200, 401), post: all(405) },
  "routes/api.v1.submissions": { path: () => "/api/v1/submissions", get: signedIn(200, 401), post: all(405) },
  "routes/api.v1.submissions.$submissionId": {
    path: (i) => `/api/v1/submissions/${i.submission}`,
    get: { ...owners(200, 0, 404, 401), tech: 200, inspector: 404, lapsed: 404 },
    post: all(405),
  },
  // contractors never see an owner's remaining life; the other owner's engineer sees an own (empty) list
  "routes/api.v1.circuits": { path: () => "/api/v1/circuits", get: owners(200, 404, 200, 401), post: all(405) },
  "routes/api.v1.circuits.$circuitId": {
    path: (i) => `/api/v1/circuits/${i.circuit}`,
    get: owners(200, 404, 404, 401),
    post: all(405),
  },
  // sites, points and the results feed are the owner's; each other owner reads its own
  "routes/api.v1.sites": { path: () => "/api/v1/sites", get: owners(200, 404, 200, 401), post: all(405) },
  "routes/api.v1.points": { path: () => "/api/v1/points", get: owners(200, 404, 200, 401), post: all(405) },
  "routes/api.v1.results": { path: () => "/api/v1/results", get: owners(200, 404, 200, 401), post: all(405) },
  "routes/api.v1.splat": { path: () => "/api/v1/no-such-endpoint", get: all(404), post: all(404) },
  "routes/not-found": { path: () => "/no/such/page", get: all(404) },
};

let db: TestDatabase;
let w: World;
let app: Express;
let ids: Ids;
let people: Record<Exclude<Caller, "anon">, string>;

beforeAll(async () => {
  db = await createTestDatabase();
  process.env.DATABASE_URL = db.url;
  w = await buildWorld(db.knex);
  app = await productionApp();
  const iso = (d: number) => new Date(Date.now() - d * 86_400_000).toISOString();
  await w.coupon("M-1");
  await w.coupon("M-2");
  await outcomeOf(recordExchange(db.knex, w.users.tech, w.point, { installSerial: "M-1", installedAt: iso(100) }));
  const removed = await outcomeOf(
    recordExchange(db.knex, w.users.tech, w.point, { removedAt: iso(5), installSerial: "M-2", installedAt: iso(5) }),
  );
  if (!removed.ok || !removed.removedExposureId) throw new Error("fixture exchange failed");
  // One removed coupon with a submitted submission, and a second removed coupon still waiting for its lab results.
  await w.coupon("M-3");
  await outcomeOf(recordExchange(db.knex, w.users.tech, w.point2, { installSerial: "M-3", installedAt: iso(90) }));
  const waiting = await outcomeOf(recordExchange(db.knex, w.users.tech, w.point2, { removedAt: iso(2) }));
  if (!waiting.ok || !waiting.removedExposureId) throw new Error("fixture exchange failed");
  const lab = {
    cleaningMethod: "",
    couponMassesG: [35.9],
    finalMassG: null,
    blankInitialMassG: null,
    blankMassesG: [],
    baseMetalFromCycle: null,
    pitDepthsMm: [],
    labNotes: "",
  };
  const saved = await outcomeOf(saveLabResult(db.knex, w.users.tech, removed.removedExposureId, lab));
  if (!saved.ok) throw new Error("fixture lab result failed");
  await outcomeOf(submitForReview(db.knex, w.users.tech, saved.submissionId));
  const contract = await db.knex("contracts").where({ owner_id: w.owner.id }).first("id");
  const circuit = await db.knex("circuits").where({ site_id: w.site.id }).first("id");
  await cml(db.knex, { ownerId: w.owner.id, circuitId: circuit.id }, { tag: "C-1-01" });
  const survey = await startSurvey(db.knex, w.users.inspector, { siteId: w.site.id, circuitIds: [circuit.id] });
  const pointRow = await db.knex("monitoring_points").where({ id: w.point }).first("circuit_id");
  ids = {
    site: w.site.id,
    circuit: pointRow.circuit_id,
    point: w.point,
    exposure: removed.removedExposureId,
    submission: saved.submissionId,
    survey: survey.submissionId,
    contract: contract.id,
    missing: "7d0c8a53-2f0e-4b7c-9a51-2b1f4c3e9d10",
  };
  people = {
    admin: w.users.admin.id,
    engineer: w.users.engineer.id,
    manager: w.users.manager.id,
    tech: w.users.tech.id,
    inspector: w.users.inspector.id,
    lapsed: w.users.lapsedTech.id,
    foreign: w.users.engineer2.id,
  };
});
afterAll(async () => {
  await shutdownApp();
  await db?.drop();
});

describe("the isolation matrix", () => {
  it("covers every route of the build", async () => {
    const build = await loadBuild();
    const routeIds = Object.keys(build.routes).filter((id) => id !== "root");
    expect(routeIds.filter((id) => !(id in matrix))).toEqual([]);
    expect(Object.keys(matrix).filter((id) => !routeIds.includes(id))).toEqual([]);
  });

  for (const [routeId, row] of Object.entries(matrix)) {
    for (const method of ["get", "post"] as const) {
      const expected = row[method];
      if (!expected) continue;
      it(`${method.toUpperCase()} ${routeId}`, async () => {
        const got: Partial<Statuses> = {};
        for (const caller of callers) {
          const url = row.path(ids);
          let req = method === "get" ? request(app).get(url) : request(app).post(url).type("form").send({});
          // a fresh session per request: a sign-out row must not sign the next rows out
          if (caller !== "anon") req = req.set("Cookie", await sessionCookieFor(db.knex, people[caller]));
          const res = await req.redirects(0);
          got[caller] = res.status;
          // Whatever the status, a caller outside the tenant never sees the owner's data.
          if (caller === "foreign" || caller === "inspector" || caller === "lapsed" || caller === "anon") {
            expect(res.text, `${caller} ${method} ${url}`).not.toContain("M-1");
          }
        }
        expect(got).toEqual(expected);
      });
    }
  }
});
