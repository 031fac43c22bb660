import { afterAll, beforeAll, beforeEach, describe, expect, it, vi } from "vitest";
import type { Knex } from "knex";
import { verifyAuditChain } from "../../app/models/audit.server";
import { enqueueNotification } from "../../app/models/notifications.server";
import { getSubmission, listSubmissions } from "../../app/models/submissions.server";
import { decide, diffRevisions, openCorrection, revisionHistory } from "../../app/models/review.server";
import { changeSinceLast, cmlHistories } from "../../app/models/survey-review.server";
import { Conflict, Forbidden, NotFoundInTenant as NotFound } from "../../app/services/outcome";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, type World } from "../helpers/fixtures";
import { outcomeOf } from "../helpers/outcome";
import { buildSurveyWorld, flag, type SurveyWorld } from "../helpers/review-world";

// The life computation is another model's work; here it is watched, to see that approval
// calls it inside the approving transaction with the survey's circuits.
const lifeCalls = vi.hoisted(() => [] as Array<{ inTransaction: boolean; request: unknown }>);
vi.mock("../../app/models/circuit-life.server", () => ({
  recomputeCircuitLife: async (trx: Knex.Transaction, request: unknown) => {
    lifeCalls.push({ inTransaction: trx.isTransaction === true, request });
    return { circuits: 0, newlyBelowRequired: [] };
  },
}));

let db: TestDatabase;
let w: World;
let s: SurveyWorld;

beforeAll(async () => {
  db = await createTestDatabase();
  w = await buildWorld(db.knex);
  s = await buildSurveyWorld(db.knex, w);
});
afterAll(async () => {
  await db?.drop();
});
beforeEach(() => {
  lifeCalls.length = 0;
});

const versionOf = async (id: string): Promise<number> =>
  (await db.knex("submissions").where({ id }).first("version")).version;

async function readingsOf(id: string) {
  const detail = await getSubmission(db.knex, w.users.engineer, id);
  if (detail.kind !== "thickness") throw new Error("expected a thickness survey");
  return detail.readings;
}

/** Two readings: one at the required thickness (a warning), one with a change below the gauge's resolution (a note). */
const flaggedSurvey = () =>
  s.submitSurvey([
    { cml: "TS-CML-01", measuredOn: "2026-11-20", thicknessMm: 2.75, flags: [flag.belowRequired("TS-CML-01", 2.75)] },
    {
      cml: "TS-CML-03",
      measuredOn: "2026-11-20",
      thicknessMm: 6.9,
      quadrantsMm: [6.9, 7.0, 6.95, 7.05],
      flags: [flag.belowResolution()],
    },
  ]);

describe("the engineer reads a thickness survey", () => {
  it("returns the readings with CML, circuit and flags instead of coupon results", async () => {
    const id = await flaggedSurvey();
    const detail = await getSubmission(db.knex, w.users.engineer, id);
    expect(detail.kind).toBe("thickness");
    if (detail.kind !== "thickness") return;
    expect(detail.submission).toMatchObject({ kind: "thickness", status: "submitted", resultCount: 2, flagCount: 2 });
    expect(detail.submission.worstSeverity).toBeNull();
    expect(detail.readings.map((r) => [r.cmlTag, r.circuitTag, r.component, r.injectionPoint, r.thicknessMm])).toEqual([
      ["TS-CML-01", "TS-100", "pipe", false, 2.75],
      ["TS-CML-03", "TS-100", "tee", true, 6.9],
    ]);
    expect(detail.readings[1]).toMatchObject({
      location: "wash-water injection",
      measuredOn: "2026-11-20",
      quadrantReadingsMm: [6.9, 7.0, 6.95, 7.05],
      instrumentResolutionMm: 0.01,
      method: "UT",
    });
    expect(detail.readings[0].flags.map((f) => f.code)).toEqual(["below-required"]);
  });

  it("lists surveys in the queue beside coupon submissions, and filters by kind", async () => {
    const id = await flaggedSurvey();
    const surveys = await listSubmissions(
      db.knex,
      w.users.engineer,
      { kind: "thickness", status: "submitted" },
      { limit: 100 },
    );
    expect(surveys.items.map((i) => i.id)).toContain(id);
    expect(surveys.items.every((i) => i.kind === "thickness")).toBe(true);
    const coupons = await listSubmissions(db.knex, w.users.engineer, { kind: "coupon" }, { limit: 100 });
    expect(coupons.items.map((i) => i.id)).not.toContain(id);
  });

  it("is not found for another owner's engineer", async () => {
    const id = await flaggedSurvey();
    await expect(getSubmission(db.knex, w.users.engineer2, id)).rejects.toBeInstanceOf(NotFound);
    await expect(
      decide(db.knex, w.users.engineer2, id, { decision: "return", version: await versionOf(id), comment: "No." }),
    ).rejects.toBeInstanceOf(NotFound);
    await expect(openCorrection(db.knex, w.users.engineer2, id, "Wrong CML read")).rejects.toBeInstanceOf(NotFound);
  });

  it("refuses a decision by the contractor's technician or the plant manager (403)", async () => {
    const id = await flaggedSurvey();
    const version = await versionOf(id);
    for (const user of [w.users.inspector, w.users.tech, w.users.manager])
      await expect(
        decide(db.knex, user, id, { decision: "approve", version, comment: "", confirmed: true }),
      ).rejects.toBeInstanceOf(Forbidden);
    expect((await db.knex("submissions").where({ id }).first("status")).status).toBe("submitted");
  });
});

describe("change since the last reading", () => {
  it("compares with the last approved reading and gives the rate on 365.25-day years, never negative", async () => {
    // An approved survey a year earlier; 2024-11-20 → 2025-11-20 is 365 days [der].
    const earlier = await s.submitSurvey([{ cml: "TS-CML-01", measuredOn: "2025-11-20", thicknessMm: 3.0 }]);
    expect(
      (
        await outcomeOf(
          decide(db.knex, w.users.engineer, earlier, {
            decision: "approve",
            version: await versionOf(earlier),
            comment: "",
            confirmed: true,
          }),
        )
      ).ok,
    ).toBe(true);
    const id = await flaggedSurvey();
    const [reading] = await readingsOf(id);
    const histories = await cmlHistories(db.knex, w.owner.id, [reading.cmlId], id);
    const change = changeSinceLast(reading, histories.get(reading.cmlId));
    expect(change?.from).toEqual({ on: "2025-11-20", thicknessMm: 3.0, what: "reading" });
    expect(change?.changeMm).toBeCloseTo(-0.25, 9);
    // 0.25 mm over 365 days of 365.25-day years [der: API 570 short-term rate = loss / years]
    expect(change?.rateMmPerYear).toBeCloseTo(0.25 / (365 / 365.25), 9);
    expect(change?.grew).toBe(false);

    const grown = changeSinceLast({ measuredOn: "2026-11-20", thicknessMm: 3.2 }, histories.get(reading.cmlId));
    expect(grown?.rateMmPerYear).toBe(0); // a wall that grew is never a negative rate [cp]
    expect(grown?.grew).toBe(true);
  });

  it("starts again from a replaced component's base-line; no span crosses the replacement", async () => {
    const before = await s.submitSurvey([{ cml: "TS-CML-02", measuredOn: "2022-05-10", thicknessMm: 4.1 }]);
    expect(
      (
        await outcomeOf(
          decide(db.knex, w.users.engineer, before, {
            decision: "approve",
            version: await versionOf(before),
            comment: "",
            confirmed: true,
          }),
        )
      ).ok,
    ).toBe(true);
    const id = await s.submitSurvey([{ cml: "TS-CML-02", measuredOn: "2026-11-20", thicknessMm: 7.0 }]);
    const [reading] = await readingsOf(id);
    const history = (await cmlHistories(db.knex, w.owner.id, [reading.cmlId], id)).get(reading.cmlId);
    expect(history?.replacements).toEqual([
      { replacedOn: "2023-06-01", baselineThicknessMm: 7.3, reason: "elbow renewed after a leak" },
    ]);
    expect(history?.readings.map((r) => r.measuredOn)).toContain("2022-05-10");
    const change = changeSinceLast(reading, history);
    expect(change?.from).toEqual({ on: "2023-06-01", thicknessMm: 7.3, what: "replacement" });
    expect(change?.changeMm).toBeCloseTo(-0.3, 9);
  });
});

describe("deciding a survey", () => {
  it("asks a reason for every warning of a reading and the tick, then approves and recomputes the circuit's life", async () => {
    const id = await flaggedSurvey();
    const readings = await readingsOf(id);
    const below = readings.find((r) => r.cmlTag === "TS-CML-01")!;
    const field = `ack.${below.id}.below-required`;
    const refused = await outcomeOf(
      decide(db.knex, w.users.engineer, id, { decision: "approve", version: await versionOf(id), comment: "" }),
    );
    expect(refused.ok).toBe(false);
    if (refused.ok) return;
    // The note (below-resolution) needs no reason; the warning does.
    expect(refused.errors).toEqual({
      [field]: "Say why this warning on CML TS-CML-01 does not stop approval.",
      confirm: "Tick to confirm that these results become permanent once approved.",
    });
    expect(lifeCalls).toEqual([]);

    const approved = await outcomeOf(
      decide(db.knex, w.users.engineer, id, {
        decision: "approve",
        version: await versionOf(id),
        comment: "Repair scheduled",
        acknowledgements: { [field]: "Sleeve fitted under work order 4411" },
        confirmed: true,
      }),
    );
    expect(approved.ok).toBe(true);
    expect(lifeCalls).toEqual([
      {
        inTransaction: true,
        request: { ownerId: w.owner.id, circuitIds: [s.circuit], cause: "approval", causeSubmissionId: id },
      },
    ]);
    const [revision] = await revisionHistory(db.knex, w.users.engineer, id);
    expect(revision.kind).toBe("thickness");
    expect(revision.acknowledgements?.map((a) => [a.label, a.subject, a.code, a.reason])).toEqual([
      ["TS-CML-01", "CML TS-CML-01", "below-required", "Sleeve fitted under work order 4411"],
    ]);
    const event = await db.knex("audit_events").where({ record_id: id, action: "submission.approved" }).first("after");
    expect(event.after.acknowledged).toEqual(["TS-CML-01 · below-required: Sleeve fitted under work order 4411"]);
    // The readings of an approved survey do not change.
    await expect(db.knex("thickness_readings").where({ id: below.id }).update({ thickness_mm: 5 })).rejects.toThrow(
      /cannot change/,
    );
    const [chain] = await verifyAuditChain(db.knex, w.owner.id);
    expect(chain.broken).toEqual([]);
    const mail = await db.knex("email_outbox").where("event_key", "like", `submission.approved:${id}:%`).first();
    expect(mail.subject).toBe("Thickness survey " + (await referenceOf(id)) + " approved by Owner One");
    expect(mail.text).toContain(
      "— 2 readings on circuit TS-100 for Plant A. Its readings are now part of the owner's record.",
    );
  });

  it("returns only with a comment, and says so in the contractor's e-mail", async () => {
    const id = await flaggedSurvey();
    const refused = await outcomeOf(
      decide(db.knex, w.users.engineer, id, { decision: "return", version: await versionOf(id), comment: " " }),
    );
    expect(refused.ok ? {} : refused.errors).toEqual({
      comment: "Say what the contractor must change: a comment is required to return a submission.",
    });
    const returned = await outcomeOf(
      decide(db.knex, w.users.engineer, id, {
        decision: "return",
        version: await versionOf(id),
        comment: "Re-read TS-CML-01 with a fresh couplant",
      }),
    );
    expect(returned.ok && returned.submission.status).toBe("returned");
    expect(lifeCalls).toEqual([]);
    const mail = await db.knex("email_outbox").where("event_key", "like", `submission.returned:${id}:%`).first();
    expect(mail.to_email).toBe("tech@inspection.test");
    expect(mail.subject).toBe(`Thickness survey ${await referenceOf(id)} returned by Owner One: changes requested`);
    expect(mail.text).toContain("Correct the readings the comment points to, then send the survey again");
  });

  it("refuses a decision on a version the engineer did not see (409)", async () => {
    const id = await flaggedSurvey();
    const seen = await versionOf(id);
    expect(
      (
        await outcomeOf(
          decide(db.knex, w.users.engineer, id, { decision: "return", version: seen, comment: "Re-read please" }),
        )
      ).ok,
    ).toBe(true);
    await expect(
      decide(db.knex, w.users.engineer, id, { decision: "return", version: seen, comment: "Re-read please" }),
    ).rejects.toBeInstanceOf(Conflict);
    await expect(
      decide(db.knex, w.users.engineer, id, { decision: "approve", version: seen + 5, comment: "", confirmed: true }),
    ).rejects.toThrow(/already returned/);
  });

  it("shows a resubmitted revision's changes per CML: changed, added and removed readings", async () => {
    const id = await flaggedSurvey();
    await decide(db.knex, w.users.engineer, id, {
      decision: "return",
      version: await versionOf(id),
      comment: "Re-read TS-CML-01",
    });
    await s.resubmitSurvey(
      id,
      [
        { cml: "TS-CML-01", measuredOn: "2026-11-21", thicknessMm: 3.05, notes: "re-read after grinding" },
        { cml: "TS-CML-02", measuredOn: "2026-11-21", thicknessMm: 7.2 },
      ],
      "Re-read with fresh couplant; TS-CML-03 was the wrong tee.",
    );
    const history = await revisionHistory(db.knex, w.users.engineer, id);
    expect(history.map((h) => [h.revision, h.decision, h.reply])).toEqual([
      [1, "returned", null],
      [2, null, "Re-read with fresh couplant; TS-CML-03 was the wrong tee."],
    ]);
    const [first, second] = history;
    if (first.kind !== "thickness" || second.kind !== "thickness") throw new Error("expected survey revisions");
    expect(diffRevisions(first, second)).toEqual([
      { cml: "TS-CML-01", field: "date measured", before: "2026-11-20", after: "2026-11-21" },
      { cml: "TS-CML-01", field: "thickness, mm", before: "2.75", after: "3.05" },
      { cml: "TS-CML-01", field: "quadrant readings, mm", before: "2.75", after: "3.05" },
      { cml: "TS-CML-01", field: "notes", before: "—", after: "re-read after grinding" },
      { cml: "TS-CML-01", field: "flags", before: "below-required (warning)", after: "none" },
      { cml: "TS-CML-02", field: "reading", before: "—", after: "added: 7.2 mm on 2026-11-21" },
      { cml: "TS-CML-03", field: "reading", before: "6.9 mm on 2026-11-20", after: "removed" },
    ]);
  });
});

describe("corrections of an approved survey", () => {
  it("copies the survey's circuits and readings, and supersedes the survey once the correction is approved", async () => {
    const id = await s.submitSurvey([
      { cml: "TS-CML-01", measuredOn: "2026-10-01", thicknessMm: 6.4 },
      { cml: "TS-CML-03", measuredOn: "2026-10-01", thicknessMm: 6.8 },
    ]);
    await decide(db.knex, w.users.engineer, id, {
      decision: "approve",
      version: await versionOf(id),
      comment: "",
      confirmed: true,
    });
    const opened = await outcomeOf(openCorrection(db.knex, w.users.engineer, id, "TS-CML-03 read on the wrong tee"));
    if (!opened.ok) throw new Error(JSON.stringify(opened.errors));
    const correctionId = opened.correctionId;
    expect(await db.knex("survey_circuits").where({ submission_id: correctionId }).pluck("circuit_id")).toEqual([
      s.circuit,
    ]);
    const copied = await readingsOf(correctionId);
    expect(copied.map((r) => [r.cmlTag, r.measuredOn, r.thicknessMm])).toEqual([
      ["TS-CML-01", "2026-10-01", 6.4],
      ["TS-CML-03", "2026-10-01", 6.8],
    ]);
    expect(await db.knex("coupon_results").where({ submission_id: correctionId }).count("* as n").first()).toEqual({
      n: "0",
    });
    const mail = await db
      .knex("email_outbox")
      .where("event_key", "like", `submission.correction_opened:${correctionId}:%`)
      .first();
    expect(mail.subject).toBe(`Thickness survey ${await referenceOf(id)} reopened for correction by Owner One`);
    expect(mail.text).toContain("— 2 readings on circuit TS-100 for Plant A as a correction (revision 2)");

    // The contractor corrects TS-CML-03 and sends it; the engineer approves the correction.
    await s.resubmitSurvey(correctionId, [
      { cml: "TS-CML-01", measuredOn: "2026-10-01", thicknessMm: 6.4 },
      { cml: "TS-CML-03", measuredOn: "2026-10-02", thicknessMm: 6.6 },
    ]);
    expect((await getSubmission(db.knex, w.users.engineer, id)).submission.status).toBe("approved");
    lifeCalls.length = 0;
    const approved = await outcomeOf(
      decide(db.knex, w.users.engineer, correctionId, {
        decision: "approve",
        version: await versionOf(correctionId),
        comment: "",
        confirmed: true,
      }),
    );
    expect(approved.ok).toBe(true);
    expect((await getSubmission(db.knex, w.users.engineer, id)).submission.status).toBe("superseded");
    expect(lifeCalls.map((c) => (c.request as { causeSubmissionId: string }).causeSubmissionId)).toEqual([
      correctionId,
    ]);
    // Only the correction's readings are approved now (what the life computation reads).
    const approvedAt03 = await db
      .knex("thickness_readings as r")
      .join("submissions as sub", "sub.id", "r.submission_id")
      .where({ "sub.status": "approved", "r.cml_id": s.cmls["TS-CML-03"], "sub.reference": await referenceOf(id) })
      .select("r.submission_id", db.knex.raw("r.thickness_mm::float8 as mm"));
    expect(approvedAt03).toEqual([{ submission_id: correctionId, mm: 6.6 }]);
  });
});

describe("the submitted e-mail for a survey", () => {
  it("names the survey, its readings and circuits", async () => {
    const id = await flaggedSurvey();
    await db.knex.transaction((trx) =>
      enqueueNotification(trx, { kind: "submission.submitted", submissionId: id, actorUserId: w.users.inspector.id }),
    );
    const mail = await db.knex("email_outbox").where("event_key", "like", `submission.submitted:${id}:%`).first();
    expect(mail.subject).toBe(`Thickness survey ${await referenceOf(id)} submitted by Inspection Co`);
    expect(mail.text).toContain(
      `Inspection Co submitted thickness survey ${await referenceOf(id)} — 2 readings on circuit TS-100 for Plant A: 2 quality flags to look at.`,
    );
  });
});

async function referenceOf(id: string): Promise<string> {
  return (await db.knex("submissions").where({ id }).first("reference")).reference;
}
