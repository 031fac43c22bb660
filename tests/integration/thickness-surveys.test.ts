import { afterAll, beforeAll, describe, expect, it } from "vitest";
import {
  getSurvey,
  importSurveyCsv,
  listSurveys,
  saveSurveyReadings,
  startSurvey,
  surveySites,
  surveyTemplateCsv,
} from "../../app/models/thickness-surveys.server";
import { listSubmissions, submitForReview } from "../../app/models/submissions.server";
import { verifyAuditChain } from "../../app/models/audit.server";
import { Conflict, Forbidden, NotFoundInTenant } from "../../app/services/outcome";
import { emptySurveyRow, type SurveyRowText } from "../../app/services/survey-spec";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, createCircuit, type World } from "../helpers/fixtures";
import { outcomeOf } from "../helpers/outcome";
import { approvedReadings, cml, designCircuit } from "../helpers/survey-world";

let db: TestDatabase;
let w: World;
let circuitA: string;
let circuitB: string;
let foreignCircuit: string;
const ids: Record<string, string> = {};

/** Yesterday by UTC: on or before today at every site, whatever its zone. */
let day: string;
const row = (values: Partial<SurveyRowText>): SurveyRowText => ({ ...emptySurveyRow(), ...values });
const tableCount = async (table: string) => Number((await db.knex(table).count({ n: "*" }))[0].n);

beforeAll(async () => {
  db = await createTestDatabase();
  w = await buildWorld(db.knex);
  day = w.shift(-1);
  const site = { id: w.site.id, name: "Plant A", code: "PA", timeZone: w.site.time_zone };
  circuitA = await createCircuit(db.knex, site, { unitTag: "U-T", circuitTag: "T-100" });
  circuitB = await createCircuit(db.knex, site, { unitTag: "U-T2", circuitTag: "T-200" });
  const foreign = { id: w.foreignSite.id, name: "Plant Z", code: "PZ", timeZone: "Europe/London" };
  foreignCircuit = await createCircuit(db.knex, foreign, { unitTag: "Z-1", circuitTag: "Z-100" });
  await designCircuit(db.knex, circuitA, { structuralMinimumMm: 3, reason: "owner's minimum for sour service" });
  const at = { ownerId: w.owner.id, circuitId: circuitA };
  ids.a1 = await cml(db.knex, at, { tag: "T-100-01", location: "upstream of the control valve", component: "pipe" });
  ids.a2 = await cml(db.knex, at, { tag: "T-100-02", component: "elbow", injectionPoint: true });
  ids.a3 = await cml(db.knex, at, { tag: "T-100-03", baselineMm: 7.11, baselineOn: "2015-06-01" });
  ids.b1 = await cml(db.knex, { ownerId: w.owner.id, circuitId: circuitB }, { tag: "T-200-01" });
  ids.z1 = await cml(db.knex, { ownerId: w.owner2.id, circuitId: foreignCircuit }, { tag: "Z-100-01" });
  // History at T-100-01: 7.11 mm in 2016 and 6.91 mm in 2020 (0.05 mm/y), approved.
  await approvedReadings(
    db.knex,
    {
      ownerId: w.owner.id,
      siteId: w.site.id,
      contractorId: w.inspection.id,
      createdBy: w.users.inspector.id,
      reference: "PA-SUB-90001",
    },
    [{ cmlId: ids.a1, circuitId: circuitA, measuredOn: "2016-03-01", thicknessMm: 7.11 }],
  );
  await approvedReadings(
    db.knex,
    {
      ownerId: w.owner.id,
      siteId: w.site.id,
      contractorId: w.inspection.id,
      createdBy: w.users.inspector.id,
      reference: "PA-SUB-90002",
    },
    [{ cmlId: ids.a1, circuitId: circuitA, measuredOn: "2020-03-01", thicknessMm: 6.91 }],
  );
});
afterAll(async () => {
  await db?.drop();
});

describe("starting a survey", () => {
  it("offers the sites a thickness contract covers, with their circuits", async () => {
    const sites = await surveySites(db.knex, w.users.inspector);
    expect(sites.map((s) => s.id)).toEqual([w.site.id]);
    expect(sites[0].circuits.map((c) => [c.tag, c.cmls])).toEqual(
      expect.arrayContaining([
        ["T-100", 3],
        ["T-200", 1],
      ]),
    );
  });

  it("refuses a contractor without thickness scope and owner staff", async () => {
    await expect(surveySites(db.knex, w.users.engineer)).rejects.toBeInstanceOf(Forbidden);
    const coupon = await outcomeOf(startSurvey(db.knex, w.users.tech, { siteId: w.site.id, circuitIds: [circuitA] }));
    expect(coupon).toEqual({ ok: false, errors: { siteId: expect.stringMatching(/thickness inspection/) } });
  });

  it("refuses a circuit of another owner's site", async () => {
    const r = await outcomeOf(
      startSurvey(db.knex, w.users.inspector, { siteId: w.site.id, circuitIds: [foreignCircuit] }),
    );
    expect(r).toEqual({ ok: false, errors: { circuitIds: "Tick circuits of the chosen site only." } });
    expect(await tableCount("survey_circuits")).toBe(2); // the two approved surveys' only
  });

  it("creates one draft, and a second start on the same site adds circuits to it", async () => {
    const first = await startSurvey(db.knex, w.users.inspector, { siteId: w.site.id, circuitIds: [circuitA] });
    expect(first).toMatchObject({ created: true, added: 1, reference: expect.stringMatching(/^PA-SUB-\d{5}$/) });
    const again = await startSurvey(db.knex, w.users.inspector, {
      siteId: w.site.id,
      circuitIds: [circuitA, circuitB],
    });
    expect(again).toEqual({ submissionId: first.submissionId, reference: first.reference, created: false, added: 1 });
    const same = await startSurvey(db.knex, w.users.inspector, { siteId: w.site.id, circuitIds: [circuitB] });
    expect(same.added).toBe(0);
    ids.survey = first.submissionId;
    const audit = await db.knex("audit_events").where({ record_id: first.submissionId }).orderBy("id").pluck("action");
    expect(audit).toEqual(["submission.created", "survey.circuits_added", "survey.circuits_added"]);
  });
});

describe("the grid", () => {
  it("shows each CML with its last approved reading and the circuit's required thickness", async () => {
    const s = await getSurvey(db.knex, w.users.inspector, ids.survey);
    expect(s.cmls.map((m) => m.tag)).toEqual(["T-100-01", "T-100-02", "T-100-03", "T-200-01"]);
    const a1 = s.cmls[0];
    expect(a1.lastApproved).toEqual({ date: "2020-03-01", thicknessMm: 6.91 });
    expect(a1.history).toHaveLength(2);
    expect(a1.requiredThicknessMm).toBe(3); // the owner's structural minimum governs (B31.3 eq. 3a gives 0.61 mm)
    expect(s.cmls[1].injectionPoint).toBe(true);
    expect(s.cmls[2].baseline).toEqual({ date: "2015-06-01", thicknessMm: 7.11 });
    expect(s.cmls[3].requiredThicknessMm).toBeNull();
  });

  it("hides the survey from another contractor and owner staff", async () => {
    await expect(getSurvey(db.knex, w.users.tech, ids.survey)).rejects.toBeInstanceOf(NotFoundInTenant);
    await expect(getSurvey(db.knex, w.users.engineer, ids.survey)).rejects.toBeInstanceOf(Forbidden);
    await expect(getSurvey(db.knex, w.users.inspector, "00000000-0000-4000-8000-000000000000")).rejects.toBeInstanceOf(
      NotFoundInTenant,
    );
  });

  it("refuses every bad field in one round, naming CML and field, and writes nothing", async () => {
    const tomorrow = w.shift(2);
    const r = await outcomeOf(
      saveSurveyReadings(
        db.knex,
        w.users.inspector,
        ids.survey,
        new Map([
          [ids.a1, row({ measuredOn: "2019-01-01", readings: ["6.8", "", "", ""] })],
          [ids.a2, row({ measuredOn: tomorrow, readings: ["6,8", "", "", ""], method: "laser" })],
          [ids.a3, row({ measuredOn: day, readings: ["6.9"], resolutionMm: "-1" })],
        ]),
      ),
    );
    expect(r).toEqual({
      ok: false,
      errors: {
        [`${ids.a1}.measuredOn`]: "CML T-100-01: the date must be after the CML's last approved reading on 2020-03-01.",
        [`${ids.a2}.measuredOn`]: expect.stringMatching(/^CML T-100-02: the date .* is in the future/),
        [`${ids.a2}.readings`]: expect.stringMatching(/^CML T-100-02: Reading 1: '6,8' uses a decimal comma/),
        [`${ids.a2}.method`]: expect.stringMatching(/^CML T-100-02: choose the method/),
        [`${ids.a3}.resolutionMm`]: "CML T-100-03: The resolution must be more than 0 mm.",
      },
    });
    expect(await db.knex("thickness_readings").where({ submission_id: ids.survey }).count()).toEqual([{ count: "0" }]);
  });

  it("refuses a CML of another owner or outside the survey's circuits (400, nothing written)", async () => {
    const other = await db
      .knex("circuits")
      .insert({
        unit_id: (await db.knex("circuits").where({ id: circuitA }).first("unit_id")).unit_id,
        site_id: w.site.id,
        tag: "T-300",
        material_code: "carbon-steel",
        service: "",
      })
      .returning("id");
    const outside = await cml(db.knex, { ownerId: w.owner.id, circuitId: other[0].id }, { tag: "T-300-01" });
    for (const id of [ids.z1, outside]) {
      const r = await outcomeOf(
        saveSurveyReadings(
          db.knex,
          w.users.inspector,
          ids.survey,
          new Map([[id, row({ measuredOn: day, readings: ["6"] })]]),
        ),
      );
      expect(r).toEqual({ ok: false, errors: { form: expect.stringMatching(/not on this survey's circuits/) } });
    }
  });

  it("saves the grid, skipping blank rows; the same grid again changes nothing", async () => {
    const grid = new Map([
      [
        ids.a1,
        row({
          measuredOn: day,
          readings: ["6.85", "6.80", "6.90", "6.88"],
          instrument: "UT gauge 7",
          resolutionMm: "0.01",
          technician: "R. Okafor",
        }),
      ],
      [ids.a2, row({ measuredOn: day, readings: ["2.95"], method: "UT-scan" })],
      [ids.a3, row({ measuredOn: day })],
    ]);
    expect(await saveSurveyReadings(db.knex, w.users.inspector, ids.survey, grid)).toEqual({
      saved: 2,
      cleared: 0,
      unchanged: 0,
    });
    expect(await saveSurveyReadings(db.knex, w.users.inspector, ids.survey, grid)).toEqual({
      saved: 0,
      cleared: 0,
      unchanged: 2,
    });
    const stored = await db.knex("thickness_readings").where({ submission_id: ids.survey, cml_id: ids.a1 }).first();
    expect(Number(stored.thickness_mm)).toBe(6.8); // the minimum of the quadrant readings
    expect(stored.quadrant_readings_mm.map(Number)).toEqual([6.85, 6.8, 6.9, 6.88]);
    const s = await getSurvey(db.knex, w.users.inspector, ids.survey);
    expect(s.cmls[0].saved).toMatchObject({ readings: ["6.85", "6.8", "6.9", "6.88"], resolutionMm: "0.01" });
  });
});

describe("the CSV import", () => {
  const header =
    "CML tag,date,reading 1 mm,reading 2 mm,reading 3 mm,reading 4 mm,method,instrument,resolution mm,technician,notes";

  it("offers a template with our headers and a row per CML", async () => {
    const csv = await surveyTemplateCsv(db.knex, w.users.inspector, ids.survey);
    expect(csv.split("\r\n")[0]).toBe(header);
    expect(csv).toMatch(/\r\nT-100-01,,/);
  });

  it("refuses the whole file naming row and column", async () => {
    const csv = `${header}\r\nT-100-03,${day},6.9,,,,UT,,,,\r\nT-100-09,${day},6,,,,UT,,,,\r\nT-200-01,2099-01-01,abc,,,,UT,,,,\r\n`;
    const r = await outcomeOf(importSurveyCsv(db.knex, w.users.inspector, ids.survey, csv));
    expect(r).toMatchObject({
      ok: false,
      problems: [{ line: 3, column: "CML tag", message: "No CML tagged T-100-09 is on this survey's circuits." }],
    });
    const r2 = await outcomeOf(
      importSurveyCsv(
        db.knex,
        w.users.inspector,
        ids.survey,
        `${header}\r\nT-100-03,${day},6.9,,,,UT,,,,\r\nT-200-01,2099-01-01,abc,,,,UT,,,,\r\n`,
      ),
    );
    expect(r2).toMatchObject({
      ok: false,
      problems: [
        {
          line: 3,
          column: "date",
          message: expect.stringMatching(/^CML T-200-01: the date 2099-01-01 is in the future/),
        },
        {
          line: 3,
          column: "reading 1 mm",
          message: expect.stringMatching(/^CML T-200-01: Reading 1: 'abc' is not a number/),
        },
      ],
    });
    expect(
      await db.knex("thickness_readings").where({ submission_id: ids.survey, cml_id: ids.a3 }).first(),
    ).toBeUndefined();
  });

  it("imports all or nothing, and the same file twice changes nothing", async () => {
    const csv = `${header}\r\nT-100-03,${day},6.91,6.95,,,UT,UT gauge 7,0.01,R. Okafor,near the weld\r\nT-200-01,${day},5.5,,,,RT,,,,\r\n`;
    const before = await db.knex("audit_events").count({ n: "*" });
    expect(await importSurveyCsv(db.knex, w.users.inspector, ids.survey, csv)).toEqual({
      saved: 2,
      cleared: 0,
      unchanged: 0,
      rows: 2,
    });
    const version = (await db.knex("submissions").where({ id: ids.survey }).first("version")).version;
    const middle = await db.knex("audit_events").count({ n: "*" });
    expect(await importSurveyCsv(db.knex, w.users.inspector, ids.survey, csv)).toEqual({
      saved: 0,
      cleared: 0,
      unchanged: 2,
      rows: 2,
    });
    expect((await db.knex("submissions").where({ id: ids.survey }).first("version")).version).toBe(version);
    expect(await db.knex("audit_events").count({ n: "*" })).toEqual(middle);
    expect(Number(middle[0].n) - Number(before[0].n)).toBe(2);
  });
});

describe("submitting", () => {
  it("refuses a survey with no readings", async () => {
    const [empty] = await db
      .knex("submissions")
      .insert({
        owner_id: w.owner.id,
        site_id: w.site.id,
        contractor_id: w.inspection.id,
        kind: "thickness",
        status: "returned",
        reference: "PA-SUB-90009",
        created_by: w.users.inspector.id,
      })
      .returning("id");
    const r = await outcomeOf(submitForReview(db.knex, w.users.inspector, empty.id));
    expect(r).toEqual({ ok: false, errors: { form: "The survey has no readings yet: enter at least one." } });
  });

  it("recomputes the flags on the server, stores them, snapshots the revision and locks the readings", async () => {
    const out = await submitForReview(db.knex, w.users.inspector, ids.survey);
    expect(out.reference).toMatch(/^PA-SUB-/);
    const sub = await db.knex("submissions").where({ id: ids.survey }).first();
    expect(sub.status).toBe("submitted");
    expect(sub.worst_severity).toBeNull();
    const readings = await db.knex("thickness_readings").where({ submission_id: ids.survey });
    const flagsOf = (cmlId: string) =>
      (readings.find((r) => r.cml_id === cmlId)?.flags as Array<{ code: string }>).map((f) => f.code);
    // T-100-01 (hand-worked): 7.11 → 6.91 mm over 2016–2020 is 0.05 mm/y; 6.91 → 6.80 mm since 2020-03-01 is
    // slower, every value on the 0.01 mm step and far above the required 3 mm: no flag.
    expect(flagsOf(ids.a1)).toEqual([]);
    // T-100-02: 2.95 mm, at or below the required 3 mm: below-required (warning).
    expect(flagsOf(ids.a2)).toEqual(["below-required"]);
    // T-100-03: base-line 7.11 mm in 2015, 6.91 mm now: two points only; 6.91 and 6.95 on the 0.01 mm step.
    expect(flagsOf(ids.a3)).toEqual(["few-readings"]);
    // T-200-01: a first reading with no history and no design data: nothing to judge.
    expect(flagsOf(ids.b1)).toEqual([]);
    const total = readings.reduce((n, r) => n + (r.flags as unknown[]).length, 0);
    expect(sub.flag_count).toBe(total);
    const revision = await db.knex("submission_revisions").where({ submission_id: ids.survey }).first();
    expect(revision.results.map((r: { cml_tag: string }) => r.cml_tag)).toEqual([
      "T-100-01",
      "T-100-02",
      "T-100-03",
      "T-200-01",
    ]);
    expect(revision.results[1]).toEqual({
      cml_id: ids.a2,
      cml_tag: "T-100-02",
      circuit_tag: "T-100",
      measured_on: day,
      thickness_mm: 2.95,
      quadrant_readings_mm: [2.95],
      method: "UT-scan",
      instrument: "",
      instrument_resolution_mm: null,
      technician: "",
      notes: "",
      flags: [expect.objectContaining({ code: "below-required", severity: "warning" })],
    });
    expect(revision.attachments).toEqual([]);
    await expect(
      db.knex("thickness_readings").where({ submission_id: ids.survey, cml_id: ids.a2 }).update({ thickness_mm: 3.5 }),
    ).rejects.toThrow(/cannot change/);
    const again = await saveSurveyReadings(db.knex, w.users.inspector, ids.survey, new Map()).catch((e) => e);
    expect(again).toBeInstanceOf(Conflict);
    const audit = await db
      .knex("audit_events")
      .where({ record_id: ids.survey, action: "submission.submitted" })
      .first();
    expect(audit.after).toMatchObject({ kind: "thickness", readings: 4, flags: total });
    expect(
      await db.knex("email_outbox").where("event_key", "like", `submission.submitted:${ids.survey}:%`).count(),
    ).toEqual([{ count: "1" }]);
    expect((await verifyAuditChain(db.knex, w.owner.id)).flatMap((r) => r.broken)).toEqual([]);
  });

  it("lists the survey for the contractor and the owner's engineer, with its kind and readings", async () => {
    const mine = await listSurveys(db.knex, w.users.inspector);
    expect(mine.find((s) => s.id === ids.survey)).toMatchObject({
      status: "submitted",
      readings: 4,
      circuitTags: ["T-100", "T-200"],
    });
    const forEngineer = await listSubmissions(db.knex, w.users.engineer, { kind: "thickness" }, { limit: 10 });
    expect(forEngineer.items.find((s) => s.id === ids.survey)).toMatchObject({ kind: "thickness", resultCount: 4 });
    const forInspector = await listSubmissions(db.knex, w.users.inspector, {}, { limit: 10 });
    expect(forInspector.items.every((s) => s.kind === "thickness")).toBe(true);
    const forCouponTech = await listSubmissions(db.knex, w.users.tech, {}, { limit: 50 });
    expect(forCouponTech.items.some((s) => s.kind === "thickness")).toBe(false);
  });
});
