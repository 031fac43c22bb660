import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { evaluateCouponResult } from "../../app/domain/index.ts";
import { calculationInput, exposureForLab, saveLabResult, type LabInputs } from "../../app/models/lab-results.server";
import { Forbidden, NotFoundInTenant as NotFound } from "../../app/services/outcome";
import {
  getSubmission,
  listSubmissions,
  parseSubmissionCursor,
  submitForReview,
} from "../../app/models/submissions.server";
import {
  awaitingLab,
  pointForWork,
  pullSchedule,
  recordExchange,
  recordExchangeForm,
  stockForPoint,
} from "../../app/models/exposures.server";
import { ownerSettings } from "../../app/models/owner-settings.server";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, type World } from "../helpers/fixtures";
import { couponSubmission, outcomeOf } from "../helpers/outcome";

let db: TestDatabase;
let w: World;
const iso = (daysAgo: number) => new Date(Date.now() - daysAgo * 86_400_000).toISOString();

// Lab numbers for a 76.2 × 19.05 × 3.18 mm strip with a 7.94 mm hole (invented test inputs).
const lab = (overrides: Partial<LabInputs> = {}): LabInputs => ({
  cleaningMethod: "inhibited HCl",
  couponMassesG: [35.8, 35.7985, 35.797],
  finalMassG: null,
  blankInitialMassG: 36.2,
  blankMassesG: [36.1986, 36.1971, 36.1957],
  baseMetalFromCycle: null,
  pitDepthsMm: [0.11, 0.08],
  labNotes: "",
  ...overrides,
});

beforeAll(async () => {
  db = await createTestDatabase();
  w = await buildWorld(db.knex);
});
afterAll(async () => {
  await db?.drop();
});

describe("exchanges at a point", () => {
  it("installs a first coupon, then exchanges it for the next in one record", async () => {
    await w.coupon("T-001");
    await w.coupon("T-002");
    const first = await outcomeOf(
      recordExchange(db.knex, w.users.tech, w.point, { installSerial: "T-001", installedAt: iso(95) }),
    );
    expect(first.ok).toBe(true);
    const schedule = await pullSchedule(db.knex, w.users.tech);
    const row = schedule.find((r) => r.pointId === w.point)!;
    expect(row.couponSerial).toBe("T-001");
    expect(row.daysInService).toBe(95);
    expect(row.state).toBe("overdue"); // 95 d in service against 90 d planned

    const exchange = await outcomeOf(
      recordExchange(db.knex, w.users.tech, w.point, {
        removedAt: iso(2),
        deposits: "thin black film",
        pittingVisible: true,
        installSerial: "T-002",
        installedAt: iso(2),
      }),
    );
    expect(exchange.ok).toBe(true);
    const exposures = await db.knex("coupon_exposures").where({ point_id: w.point }).orderBy("installed_at");
    expect(exposures).toHaveLength(2);
    expect(exposures[0].removed_at).not.toBeNull();
    expect(exposures[1].removed_at).toBeNull();
    const audit = await db.knex("audit_events").whereIn("action", ["coupon.removed", "coupon.installed"]);
    expect(audit).toHaveLength(3);
  });

  it("refuses a second coupon while one is in service, a used coupon, and a removal before installation", async () => {
    await w.coupon("T-003");
    const second = await outcomeOf(
      recordExchange(db.knex, w.users.tech, w.point, { installSerial: "T-003", installedAt: iso(1) }),
    );
    expect(second).toEqual({ ok: false, errors: { removedAt: expect.stringMatching(/still in service/) } });
    const reused = await outcomeOf(
      recordExchange(db.knex, w.users.tech, w.point2, { installSerial: "T-001", installedAt: iso(1) }),
    );
    expect(reused.ok === false && reused.errors.installSerial).toMatch(/already been exposed/);
    const early = await outcomeOf(recordExchange(db.knex, w.users.tech, w.point, { removedAt: iso(10) }));
    expect(early.ok === false && early.errors.removedAt).toMatch(/after the coupon was installed/);
    const unknown = await outcomeOf(
      recordExchange(db.knex, w.users.tech, w.point2, { installSerial: "NOPE", installedAt: iso(1) }),
    );
    expect(unknown.ok === false && unknown.errors.installSerial).toMatch(/no coupon NOPE/);
  });

  it("has the database refuse overlapping exposures at a point even without the app", async () => {
    const couponId = await w.coupon("T-004");
    await expect(
      db
        .knex("coupon_exposures")
        .insert({ owner_id: w.owner.id, point_id: w.point, coupon_id: couponId, installed_at: iso(1) }),
    ).rejects.toThrow(/coupon_exposures_no_overlap/);
  });
});

describe("who may record coupon work", () => {
  it("refuses an inspection technician (thickness-only contract) with 403 and hides the point from others", async () => {
    await expect(pointForWork(db.knex, w.users.inspector, w.point)).rejects.toBeInstanceOf(Forbidden);
    await expect(pointForWork(db.knex, w.users.lapsedTech, w.point)).rejects.toBeInstanceOf(NotFound);
    await expect(pointForWork(db.knex, w.users.engineer, w.point)).rejects.toBeInstanceOf(Forbidden);
    expect(await pullSchedule(db.knex, w.users.inspector)).toEqual([]);
    expect(await pullSchedule(db.knex, w.users.lapsedTech)).toEqual([]);
    expect(await pullSchedule(db.knex, w.users.engineer2)).toEqual([]);
  });
});

describe("lab results and submissions", () => {
  let exposureId: string;
  let submissionId: string;

  it("refuses bad numbers and writes nothing", async () => {
    exposureId = (await db.knex("coupon_exposures").where({ point_id: w.point }).whereNotNull("removed_at").first("id"))
      .id;
    const bad = await outcomeOf(
      saveLabResult(
        db.knex,
        w.users.tech,
        exposureId,
        lab({ couponMassesG: [35.8, 35.9], blankMassesG: [36.19, 36.18] }),
      ),
    );
    expect(bad.ok === false && bad.errors.couponMassesG).toMatch(/went up after cleaning/);
    const deepPit = await outcomeOf(saveLabResult(db.knex, w.users.tech, exposureId, lab({ pitDepthsMm: [4] })));
    expect(deepPit.ok === false && deepPit.errors.pitDepthsMm).toMatch(/deeper than the coupon/);
    expect(await db.knex("submissions").count({ n: "*" }).first()).toEqual({ n: "0" });
  });

  it("stores exactly what the form's preview computes from the same inputs", async () => {
    const saved = await outcomeOf(saveLabResult(db.knex, w.users.tech, exposureId, lab()));
    expect(saved.ok).toBe(true);
    if (!saved.ok) return;
    submissionId = saved.submissionId;
    const exposure = await exposureForLab(db.knex, w.users.tech, exposureId);
    const preview = evaluateCouponResult(calculationInput(exposure, lab(), await ownerSettings(db.knex, w.owner.id)));
    const row = await db
      .knex("coupon_results")
      .where({ exposure_id: exposureId })
      .first("computed", "general_severity");
    expect(preview.ok).toBe(true);
    if (preview.ok) {
      expect(row.computed.rate).toEqual(preview.result.rate);
      expect(row.computed.massLoss).toEqual(preview.result.massLoss);
      expect(row.general_severity).toBe(preview.result.severity.general);
    }
    expect(row.computed.basis.yearBasis.ratesHoursPerYear).toBe(8760);
    expect(row.computed.massLoss.method).toBe("blank-corrected");
  });

  it("keeps drafts from the owner and from other contractors", async () => {
    await expect(getSubmission(db.knex, w.users.engineer, submissionId)).rejects.toBeInstanceOf(NotFound);
    await expect(getSubmission(db.knex, w.users.inspector, submissionId)).rejects.toBeInstanceOf(NotFound);
    await expect(getSubmission(db.knex, w.users.engineer2, submissionId)).rejects.toBeInstanceOf(NotFound);
    expect((await getSubmission(db.knex, w.users.tech, submissionId)).submission.status).toBe("draft");
  });

  it("submits the submission, recomputing every result, and shows it to the owner but not to another owner", async () => {
    await expect(submitForReview(db.knex, w.users.engineer, submissionId)).rejects.toBeInstanceOf(Forbidden);
    const submitted = await outcomeOf(submitForReview(db.knex, w.users.tech, submissionId));
    expect(submitted.ok).toBe(true);
    const { submission, results } = await couponSubmission(getSubmission(db.knex, w.users.engineer, submissionId));
    expect(submission.status).toBe("submitted");
    expect(submission.worstSeverity).toBe(results[0].computed.severity.worst);
    await expect(getSubmission(db.knex, w.users.engineer2, submissionId)).rejects.toBeInstanceOf(NotFound);
    // The state changed under the user: a conflict (409 on the page), never a field error.
    await expect(submitForReview(db.knex, w.users.tech, submissionId)).rejects.toThrow(
      expect.objectContaining({ status: 409, message: expect.stringMatching(/only a draft or returned submission/) }),
    );
    await expect(saveLabResult(db.knex, w.users.tech, exposureId, lab())).rejects.toThrow(
      expect.objectContaining({ status: 409, message: expect.stringMatching(/already in submission/) }),
    );
  });

  it("pages through submissions with a cursor", async () => {
    // three more submissions, one per fresh exposure at the second point
    for (const [i, serial] of ["P-1", "P-2", "P-3"].entries()) {
      await w.coupon(serial);
      const start = 300 - i * 70;
      expect(
        (
          await outcomeOf(
            recordExchange(db.knex, w.users.tech, w.point2, { installSerial: serial, installedAt: iso(start) }),
          )
        ).ok,
      ).toBe(true);
      expect(
        (await outcomeOf(recordExchange(db.knex, w.users.tech, w.point2, { removedAt: iso(start - 60) }))).ok,
      ).toBe(true);
      const exp = await db
        .knex("coupon_exposures as e")
        .join("coupons as c", "c.id", "e.coupon_id")
        .where("c.serial", serial)
        .first("e.id");
      const saved = await outcomeOf(saveLabResult(db.knex, w.users.tech, exp.id, lab({ pitDepthsMm: [] })));
      expect(saved.ok).toBe(true);
      if (saved.ok) expect((await outcomeOf(submitForReview(db.knex, w.users.tech, saved.submissionId))).ok).toBe(true);
    }
    const first = await listSubmissions(db.knex, w.users.engineer, {}, { limit: 2 });
    expect(first.items).toHaveLength(2);
    expect(first.nextCursor).not.toBeNull();
    const cursor = parseSubmissionCursor(first.nextCursor!)!;
    const second = await listSubmissions(db.knex, w.users.engineer, {}, { limit: 2, cursor });
    expect(second.items).toHaveLength(2);
    expect(second.nextCursor).toBeNull();
    const ids = [...first.items, ...second.items].map((p) => p.id);
    expect(new Set(ids).size).toBe(4);
    expect((await listSubmissions(db.knex, w.users.engineer2, {}, { limit: 50 })).items).toEqual([]);
    expect((await listSubmissions(db.knex, w.users.engineer, { status: "approved" }, { limit: 50 })).items).toEqual([]);
  });
});

describe("stock that fits the point, and every problem of the exchange form at once", () => {
  let flushPoint: string;
  beforeAll(async () => {
    const circuit = await db.knex("monitoring_points").where({ id: w.point }).first("circuit_id", "site_id");
    [{ id: flushPoint }] = await db
      .knex("monitoring_points")
      .insert({
        owner_id: w.owner.id,
        site_id: circuit.site_id,
        circuit_id: circuit.circuit_id,
        tag: "CP-FLUSH",
        planned_exposure_days: 90,
        mounting: "flush",
      })
      .returning("id");
    await w.coupon("FIT-STRIP");
  });

  it("offers only coupons that fit and refuses a strip at a flush point, naming the field and writing nothing", async () => {
    const point = await pointForWork(db.knex, w.users.tech, flushPoint);
    const stock = await stockForPoint(db.knex, point);
    expect(stock.fitting).toEqual([]);
    expect(stock.notFitting).toBeGreaterThan(0);
    const refused = await outcomeOf(
      recordExchange(db.knex, w.users.tech, flushPoint, { installSerial: "FIT-STRIP", installedAt: iso(1) }),
    );
    expect(refused).toEqual({
      ok: false,
      errors: {
        installSerial:
          "Coupon FIT-STRIP is a strip; it does not fit this point. A flush-mounted point takes flush disc coupons only.",
      },
    });
    expect(await db.knex("coupon_exposures").where({ point_id: flushPoint })).toEqual([]);
    const intrusive = await stockForPoint(db.knex, await pointForWork(db.knex, w.users.tech, w.point2));
    expect(intrusive.fitting.map((c) => c.serial)).toContain("FIT-STRIP");
  });

  it("reports every field's problem of a form body in one round, the point's checks included", async () => {
    const before = await db.knex("coupon_exposures").count({ n: "*" }).first();
    const audit = await db.knex("audit_events").count({ n: "*" }).first();
    const bad = await outcomeOf(
      recordExchangeForm(db.knex, w.users.tech, flushPoint, {
        removedAt: "2026-13-40T10:00", // no coupon is in service here either
        deposits: "x".repeat(501),
        pittingVisible: "maybe",
        damage: "y".repeat(501),
        notes: "z".repeat(2001),
        installSerial: "FIT-STRIP", // a strip at a flush point
        installedAt: "yesterday",
      }),
    );
    expect(bad).toEqual({
      ok: false,
      errors: {
        removedAt: "Enter a date and time, such as 2026-11-03 14:20.",
        deposits: "Keep the deposits to 500 characters.",
        pittingVisible: "Say whether pitting was visible: yes, no, or not recorded.",
        damage: "Keep the damage to 500 characters.",
        notes: "Keep the notes to 2000 characters.",
        installSerial:
          "Coupon FIT-STRIP is a strip; it does not fit this point. A flush-mounted point takes flush disc coupons only.",
        installedAt: "Enter a date and time, such as 2026-11-03 14:20.",
      },
    });
    expect(await db.knex("coupon_exposures").count({ n: "*" }).first()).toEqual(before);
    expect(await db.knex("audit_events").count({ n: "*" }).first()).toEqual(audit);
  });

  it("names the missing half of an installation and a removal where nothing is in service, together", async () => {
    const bad = await outcomeOf(
      recordExchangeForm(db.knex, w.users.tech, flushPoint, {
        removedAt: "2026-11-03T14:20",
        installSerial: "FIT-STRIP",
      }),
    );
    expect(bad).toEqual({
      ok: false,
      errors: {
        removedAt: "No coupon is in service at this point, so there is nothing to remove.",
        installedAt: "Enter when the new coupon went in.",
        installSerial:
          "Coupon FIT-STRIP is a strip; it does not fit this point. A flush-mounted point takes flush disc coupons only.",
      },
    });
  });
});

describe("removed coupons waiting for the lab", () => {
  it("pages on the server, oldest removal first, with the count of each list", async () => {
    // Three coupons in and out at the second point within the last half day, with no lab results yet
    // (whatever is in service there comes out first).
    await outcomeOf(recordExchange(db.knex, w.users.tech, w.point2, { removedAt: iso(0.45) }));
    for (const [i, serial] of ["WL-1", "WL-2", "WL-3"].entries()) {
      await w.coupon(serial);
      await recordExchange(db.knex, w.users.tech, w.point2, { installSerial: serial, installedAt: iso(0.4 - i * 0.1) });
      await recordExchange(db.knex, w.users.tech, w.point2, { removedAt: iso(0.35 - i * 0.1) });
    }
    const all = await awaitingLab(db.knex, w.users.tech, { hasDraft: false }, { number: 1, size: 500 });
    const serials = all.items.map((r) => r.couponSerial).filter((s) => s.startsWith("WL-"));
    expect(serials).toEqual(["WL-1", "WL-2", "WL-3"]);
    const pages = [];
    for (let n = 1; n <= all.total; n++)
      pages.push(...(await awaitingLab(db.knex, w.users.tech, { hasDraft: false }, { number: n, size: 1 })).items);
    expect(pages.map((r) => r.exposureId)).toEqual(all.items.map((r) => r.exposureId));
    // None of them has results in a draft, and another owner's engineer sees none of them.
    const drafts = await awaitingLab(db.knex, w.users.tech, { hasDraft: true }, { number: 1, size: 500 });
    expect(drafts.items.map((r) => r.couponSerial)).not.toContain("WL-1");
    const foreign = await awaitingLab(db.knex, w.users.engineer2, { hasDraft: false }, { number: 1, size: 500 });
    expect(foreign.items.map((r) => r.couponSerial)).not.toContain("WL-1");
  });
});
