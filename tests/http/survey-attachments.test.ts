import { createHash } from "node:crypto";
import type { Express } from "express";
import sharp from "sharp";
import request from "supertest";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { saveSurveyReadings, startSurvey } from "../../app/models/thickness-surveys.server";
import { submitForReview } from "../../app/models/submissions.server";
import { emptySurveyRow } from "../../app/services/survey-spec";
import { productionApp, shutdownApp } from "../helpers/app";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, dateFromToday, type World } from "../helpers/fixtures";
import { sessionCookieFor } from "../helpers/session";
import { cml } from "../helpers/survey-world";

let db: TestDatabase;
let app: Express;
let w: World;
let surveyId: string;
let cmlId: string;
const cookies: Record<"inspector" | "tech" | "engineer" | "foreign", string> = {} as never;

const upload = (cookie: string, file: Buffer, filename: string, kind: string, survey = surveyId) =>
  request(app)
    .post(`/surveys/${survey}/attachments`)
    .set("Cookie", cookie)
    .field("kind", kind)
    .attach("file", file, { filename, contentType: "application/octet-stream" });
const rowCount = async () => Number((await db.knex("attachments").count({ n: "*" }).first())!.n);
/** A minimal, valid one-page PDF. */
const pdf = () =>
  Buffer.from(
    "%PDF-1.4\n1 0 obj << /Type /Catalog /Pages 2 0 R >> endobj\n2 0 obj << /Type /Pages /Kids [3 0 R] /Count 1 >> endobj\n" +
      "3 0 obj << /Type /Page /Parent 2 0 R /MediaBox [0 0 595 842] >> endobj\ntrailer << /Root 1 0 R >>\n%%EOF\n",
  );
/** An instrument export as a gauge writes it (invented readings). */
const exportCsv = () =>
  Buffer.from("Location,Value (mm),Date\r\nC-1-01 12h,6.85,2026-12-01\r\nC-1-01 3h,6.80,2026-12-01\r\n", "utf8");

beforeAll(async () => {
  db = await createTestDatabase();
  process.env.DATABASE_URL = db.url;
  w = await buildWorld(db.knex);
  const circuit = await db.knex("circuits").where({ site_id: w.site.id }).first("id");
  cmlId = await cml(db.knex, { ownerId: w.owner.id, circuitId: circuit.id }, { tag: "C-1-01" });
  surveyId = (await startSurvey(db.knex, w.users.inspector, { siteId: w.site.id, circuitIds: [circuit.id] }))
    .submissionId;
  app = await productionApp();
  cookies.inspector = await sessionCookieFor(db.knex, w.users.inspector.id);
  cookies.tech = await sessionCookieFor(db.knex, w.users.tech.id);
  cookies.engineer = await sessionCookieFor(db.knex, w.users.engineer.id);
  cookies.foreign = await sessionCookieFor(db.knex, w.users.engineer2.id);
});
afterAll(async () => {
  await shutdownApp();
  await db?.drop();
});

describe("a survey's files", () => {
  const ids: Record<string, string> = {};

  it("stores the survey sheet (PDF) under the survey's key, without a thumbnail", async () => {
    const res = await upload(cookies.inspector, pdf(), "survey sheet C-1.pdf", "survey_sheet").expect(201);
    expect(res.body).toMatchObject({ kind: "survey_sheet", contentType: "application/pdf", thumbnailUrl: null });
    ids.sheet = res.body.id;
    const row = await db.knex("attachments").where({ id: ids.sheet }).first();
    expect(row).toMatchObject({
      state: "stored",
      submission_id: surveyId,
      exposure_id: null,
      object_key: `owners/${w.owner.id}/submissions/${surveyId}/${ids.sheet}/original`,
      thumbnail_key: null,
      sha256: createHash("sha256").update(pdf()).digest("hex"),
    });
    const audit = await db.knex("audit_events").where({ record_id: surveyId, action: "attachment.uploaded" }).first();
    expect(audit.after).toMatchObject({ attachment: ids.sheet, kind: "survey_sheet" });
  });

  it("stores a photo with a thumbnail", async () => {
    const jpeg = await sharp({ create: { width: 400, height: 300, channels: 3, background: "#556677" } })
      .jpeg()
      .toBuffer();
    const res = await upload(cookies.inspector, jpeg, "elbow.jpg", "survey_photo").expect(201);
    expect(res.body.thumbnailUrl).toBe(`/attachments/${res.body.id}/thumbnail`);
    const row = await db.knex("attachments").where({ id: res.body.id }).first();
    expect(row.thumbnail_key).toBe(`owners/${w.owner.id}/submissions/${surveyId}/${res.body.id}/thumb.jpg`);
    ids.photo = res.body.id;
  });

  it("accepts the instrument's CSV export as text/csv, saved (not opened) when viewed", async () => {
    const res = await upload(cookies.inspector, exportCsv(), "gauge-export.csv", "instrument_export").expect(201);
    expect(res.body).toMatchObject({ kind: "instrument_export", contentType: "text/csv", thumbnailUrl: null });
    ids.csv = res.body.id;
    const view = await request(app).get(`/attachments/${ids.csv}`).set("Cookie", cookies.inspector).expect(302);
    expect(decodeURIComponent(view.headers.location)).toMatch(/attachment; filename="gauge-export.csv"/);
    const file = await fetch(view.headers.location);
    expect(Buffer.from(await file.arrayBuffer()).equals(exportCsv())).toBe(true);
  });

  it("refuses an oversized CSV export (over 5 MB) with its own message, and files that are not text", async () => {
    const before = await rowCount();
    const big = Buffer.alloc(5 * 1024 * 1024 + 10, "1,2\r\n");
    const tooBig = await upload(cookies.inspector, big, "huge.csv", "instrument_export").expect(413);
    expect(tooBig.body.detail).toMatch(/an instrument export may be at most 5 MB/);
    const binary = await upload(cookies.inspector, Buffer.from([0x31, 0x2c, 0x00, 0xff]), "x.csv", "instrument_export");
    expect(binary.status).toBe(415);
    expect(binary.body.detail).toMatch(/not a text CSV export/);
    const latin1 = await upload(
      cookies.inspector,
      Buffer.from([0x61, 0x2c, 0xe9, 0x0d, 0x0a]),
      "l.csv",
      "instrument_export",
    );
    expect(latin1.status).toBe(415);
    const prose = await upload(cookies.inspector, Buffer.from("just some words\n"), "n.csv", "instrument_export");
    expect(prose.status).toBe(415);
    const pdfAsPhoto = await upload(cookies.inspector, pdf(), "p.pdf", "survey_photo").expect(415);
    expect(pdfAsPhoto.body.detail).toMatch(/only as the survey sheet/);
    const csvAsPhoto = await upload(cookies.inspector, exportCsv(), "e.csv", "survey_photo").expect(415);
    expect(csvAsPhoto.body.detail).toBeTruthy();
    await upload(cookies.inspector, pdf(), "p.pdf", "as_removed").expect(400);
    expect(await rowCount()).toBe(before);
  });

  it("lists the files for the technician; other contractors, owner staff and other owners are refused", async () => {
    const list = await request(app)
      .get(`/surveys/${surveyId}/attachments`)
      .set("Cookie", cookies.inspector)
      .expect(200);
    expect(list.body.attachments.map((a: { id: string }) => a.id)).toEqual([ids.sheet, ids.photo, ids.csv]);
    await request(app).get(`/surveys/${surveyId}/attachments`).set("Cookie", cookies.tech).expect(404);
    await request(app).get(`/surveys/${surveyId}/attachments`).set("Cookie", cookies.engineer).expect(403);
    await upload(cookies.tech, pdf(), "s.pdf", "survey_sheet").expect(404);
    await upload(cookies.engineer, pdf(), "s.pdf", "survey_sheet").expect(403);
    // a draft's files stay with the contractor, as the draft does
    for (const who of ["tech", "engineer", "foreign"] as const)
      await request(app).get(`/attachments/${ids.sheet}`).set("Cookie", cookies[who]).expect(404);
  });

  it("removes a file of an open survey, and locks the files once submitted (snapshotted with the revision)", async () => {
    await request(app)
      .delete(`/surveys/${surveyId}/attachments?id=${ids.photo}`)
      .set("Cookie", cookies.inspector)
      .expect(204);
    expect(await db.knex("attachments").where({ id: ids.photo }).first()).toBeUndefined();
    await saveSurveyReadings(
      db.knex,
      w.users.inspector,
      surveyId,
      new Map([[cmlId, { ...emptySurveyRow(dateFromToday(-1)), readings: ["6.8", "", "", ""] }]]),
    );
    await submitForReview(db.knex, w.users.inspector, surveyId);
    const revision = await db.knex("submission_revisions").where({ submission_id: surveyId }).first();
    expect(revision.attachments).toEqual([
      {
        id: ids.sheet,
        submissionId: surveyId,
        kind: "survey_sheet",
        name: "survey sheet C-1.pdf",
        sha256: expect.any(String),
      },
      {
        id: ids.csv,
        submissionId: surveyId,
        kind: "instrument_export",
        name: "gauge-export.csv",
        sha256: expect.any(String),
      },
    ]);
    const locked = await upload(cookies.inspector, pdf(), "late.pdf", "survey_sheet").expect(409);
    expect(locked.body.detail).toMatch(/can no longer change/);
    await request(app)
      .delete(`/surveys/${surveyId}/attachments?id=${ids.sheet}`)
      .set("Cookie", cookies.inspector)
      .expect(409);
    // submitted: the owner's engineer may view the files now; another owner still may not
    await request(app).get(`/attachments/${ids.sheet}`).set("Cookie", cookies.engineer).expect(302);
    await request(app).get(`/attachments/${ids.sheet}`).set("Cookie", cookies.foreign).expect(404);
  });
});
