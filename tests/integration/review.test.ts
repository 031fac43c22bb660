import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { verifyAuditChain } from "../../app/models/audit.server";
import { Forbidden, NotFoundInTenant as NotFound } from "../../app/services/outcome";
import { getSubmission, submitForReview } from "../../app/models/submissions.server";
import { recordExchange } from "../../app/models/exposures.server";
import { saveLabResult, type LabInputs } from "../../app/models/lab-results.server";
import { decide, openCorrection, revisionHistory, diffRevisions } from "../../app/models/review.server";
import { Conflict } from "../../app/services/outcome";
import type { SessionUser } from "../../app/context";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, type World } from "../helpers/fixtures";
import { couponSubmission, outcomeOf } from "../helpers/outcome";

let db: TestDatabase;
let w: World;
const iso = (daysAgo: number) => new Date(Date.now() - daysAgo * 86_400_000).toISOString();
let serialNo = 0;

// Invented lab numbers for a carbon-steel strip coupon.
const lab = (loss = 0.2, overrides: Partial<LabInputs> = {}): LabInputs => ({
  cleaningMethod: "inhibited HCl",
  couponMassesG: [36.1234 - loss],
  finalMassG: null,
  blankInitialMassG: null,
  blankMassesG: [],
  baseMetalFromCycle: null,
  pitDepthsMm: [],
  labNotes: "",
  ...overrides,
});

/** A submission sent for review with one coupon pulled at the first point. */
async function submittedSubmission(): Promise<{ id: string; exposureId: string }> {
  const serial = `R-${++serialNo}`;
  await w.coupon(serial);
  const start = 4000 - serialNo * 100;
  expect(
    (
      await outcomeOf(
        recordExchange(db.knex, w.users.tech, w.point2, { installSerial: serial, installedAt: iso(start) }),
      )
    ).ok,
  ).toBe(true);
  const removed = await outcomeOf(recordExchange(db.knex, w.users.tech, w.point2, { removedAt: iso(start - 90) }));
  if (!removed.ok || !removed.removedExposureId) throw new Error("removal failed");
  const saved = await outcomeOf(saveLabResult(db.knex, w.users.tech, removed.removedExposureId, lab()));
  if (!saved.ok) throw new Error(JSON.stringify(saved.errors));
  expect((await outcomeOf(submitForReview(db.knex, w.users.tech, saved.submissionId))).ok).toBe(true);
  return { id: saved.submissionId, exposureId: removed.removedExposureId };
}

async function versionOf(id: string): Promise<number> {
  return (await db.knex("submissions").where({ id }).first("version")).version;
}

beforeAll(async () => {
  db = await createTestDatabase();
  w = await buildWorld(db.knex);
});
afterAll(async () => {
  await db?.drop();
});

describe("who may decide: state × role × action", () => {
  type Expect = "ok" | "forbidden" | "notFound";
  const roles: Array<[string, () => SessionUser, Expect]> = [
    ["integrity engineer", () => w.users.engineer, "ok"],
    ["plant manager", () => w.users.manager, "forbidden"],
    ["administrator", () => w.users.admin, "forbidden"],
    ["contractor technician", () => w.users.tech, "forbidden"],
    ["another owner's engineer", () => w.users.engineer2, "notFound"],
  ];
  for (const action of ["approve", "return"] as const) {
    for (const [label, user, expected] of roles) {
      it(`${action} a submission sent for review as ${label}: ${expected}`, async () => {
        const { id } = await submittedSubmission();
        const attempt = outcomeOf(
          decide(db.knex, user(), id, {
            decision: action,
            version: await versionOf(id),
            comment: "Re-weigh the coupon.",
            confirmed: true,
          }),
        );
        if (expected === "ok") {
          const outcome = await attempt;
          expect(outcome.ok).toBe(true);
          expect((await db.knex("submissions").where({ id }).first("status")).status).toBe(
            action === "approve" ? "approved" : "returned",
          );
        } else {
          await expect(attempt).rejects.toBeInstanceOf(expected === "forbidden" ? Forbidden : NotFound);
          expect((await db.knex("submissions").where({ id }).first("status")).status).toBe("submitted");
        }
      });
    }
  }

  it("refuses to decide a submission that is not submitted (approved, returned) with a conflict", async () => {
    const { id } = await submittedSubmission();
    expect(
      (
        await outcomeOf(
          decide(db.knex, w.users.engineer, id, {
            decision: "approve",
            version: await versionOf(id),
            comment: "",
            confirmed: true,
          }),
        )
      ).ok,
    ).toBe(true);
    await expect(
      decide(db.knex, w.users.engineer, id, { decision: "return", version: await versionOf(id), comment: "again" }),
    ).rejects.toBeInstanceOf(Conflict);
    const other = await submittedSubmission();
    expect(
      (
        await outcomeOf(
          decide(db.knex, w.users.engineer, other.id, {
            decision: "return",
            version: await versionOf(other.id),
            comment: "check pits",
          }),
        )
      ).ok,
    ).toBe(true);
    await expect(
      decide(db.knex, w.users.engineer, other.id, {
        decision: "approve",
        version: await versionOf(other.id),
        comment: "",
      }),
    ).rejects.toBeInstanceOf(Conflict);
  });

  it("requires a comment to return", async () => {
    const { id } = await submittedSubmission();
    const outcome = await outcomeOf(
      decide(db.knex, w.users.engineer, id, { decision: "return", version: await versionOf(id), comment: " " }),
    );
    expect(outcome.ok === false && outcome.errors.comment).toMatch(/comment is required/);
  });
});

describe("two engineers at once", () => {
  it("lets exactly one decision win; the other gets a conflict naming the current state", async () => {
    const { id } = await submittedSubmission();
    const [second] = await db
      .knex("users")
      .insert({
        email: "engineer-b@one.test",
        name: "B",
        role: "integrity_engineer",
        status: "active",
        organisation_id: w.owner.id,
      })
      .returning("id");
    const other = { ...w.users.engineer, id: second.id, email: "engineer-b@one.test" };
    const version = await versionOf(id);
    const results = await Promise.allSettled([
      outcomeOf(decide(db.knex, w.users.engineer, id, { decision: "approve", version, comment: "", confirmed: true })),
      outcomeOf(decide(db.knex, other, id, { decision: "return", version, comment: "Pit depths look wrong." })),
    ]);
    const won = results.filter((r) => r.status === "fulfilled");
    const lost = results.filter((r) => r.status === "rejected");
    expect(won).toHaveLength(1);
    expect(lost).toHaveLength(1);
    const error = (lost[0] as PromiseRejectedResult).reason;
    expect(error).toBeInstanceOf(Conflict);
    expect(error.message).toMatch(/already (approved|returned)/);
    const decisions = await db
      .knex("audit_events")
      .where({ record_id: id })
      .whereIn("action", ["submission.approved", "submission.returned"]);
    expect(decisions).toHaveLength(1);
  });
});

describe("returned submissions come back as new revisions", () => {
  it("keeps each revision and shows what changed", async () => {
    const { id, exposureId } = await submittedSubmission();
    expect(
      (
        await outcomeOf(
          decide(db.knex, w.users.engineer, id, {
            decision: "return",
            version: await versionOf(id),
            comment: "Blank missing",
          }),
        )
      ).ok,
    ).toBe(true);
    const saved = await outcomeOf(
      saveLabResult(db.knex, w.users.tech, exposureId, lab(0.25, { labNotes: "re-weighed" })),
    );
    expect(saved.ok && saved.submissionId).toBe(id);
    expect((await outcomeOf(submitForReview(db.knex, w.users.tech, id))).ok).toBe(true);
    const { submission } = await getSubmission(db.knex, w.users.engineer, id);
    expect(submission.revision).toBe(2);
    const history = await revisionHistory(db.knex, w.users.engineer, id);
    expect(history.map((h) => [h.revision, h.decision])).toEqual([
      [1, "returned"],
      [2, null],
    ]);
    const changes = diffRevisions(history[0], history[1], () => "R");
    expect(changes.map((c) => c.field)).toEqual(
      expect.arrayContaining(["coupon masses after cleaning, g", "lab notes", "general rate, mm/y"]),
    );
  });
});

describe("approved results are immutable", () => {
  it("has the database refuse changes to an approved submission and its results", async () => {
    const { id } = await submittedSubmission();
    expect(
      (
        await outcomeOf(
          decide(db.knex, w.users.engineer, id, {
            decision: "approve",
            version: await versionOf(id),
            comment: "",
            confirmed: true,
          }),
        )
      ).ok,
    ).toBe(true);
    await expect(db.knex("submissions").where({ id }).update({ decision_comment: "edited" })).rejects.toThrow(
      /approved and cannot change/,
    );
    await expect(
      db.knex("coupon_results").where({ submission_id: id }).update({ lab_notes: "edited" }),
    ).rejects.toThrow(/cannot change/);
    await expect(db.knex("coupon_results").where({ submission_id: id }).delete()).rejects.toThrow(/cannot change/);
    await expect(db.knex("submissions").where({ id }).delete()).rejects.toThrow(/cannot be deleted/);
  });
});

describe("corrections", () => {
  it("reopens an approved submission with a reason; once approved it supersedes the old one, which stays readable", async () => {
    const { id, exposureId } = await submittedSubmission();
    expect(
      (
        await outcomeOf(
          decide(db.knex, w.users.engineer, id, {
            decision: "approve",
            version: await versionOf(id),
            comment: "",
            confirmed: true,
          }),
        )
      ).ok,
    ).toBe(true);
    const noReason = await outcomeOf(openCorrection(db.knex, w.users.engineer, id, ""));
    expect(noReason.ok).toBe(false);
    await expect(openCorrection(db.knex, w.users.tech, id, "lab re-weighed")).rejects.toBeInstanceOf(Forbidden);
    const opened = await outcomeOf(openCorrection(db.knex, w.users.engineer, id, "The lab re-weighed the coupon"));
    if (!opened.ok) throw new Error("correction not opened");
    expect((await outcomeOf(openCorrection(db.knex, w.users.engineer, id, "twice"))).ok).toBe(false);
    // the technician who submitted the approved submission is told, with the reason
    const told = await db
      .knex("email_outbox")
      .where("event_key", "like", `submission.correction_opened:${opened.correctionId}:%`)
      .select("to_email", "text");
    expect(told.map((m) => m.to_email)).toEqual([w.users.tech.email]);
    expect(told[0].text).toContain("The lab re-weighed the coupon");

    // the contractor edits the correction and resubmits it
    const saved = await outcomeOf(saveLabResult(db.knex, w.users.tech, exposureId, lab(0.18)));
    expect(saved.ok && saved.submissionId).toBe(opened.correctionId);
    expect((await outcomeOf(submitForReview(db.knex, w.users.tech, opened.correctionId))).ok).toBe(true);
    // the old one is still in force until the correction is approved
    expect((await getSubmission(db.knex, w.users.engineer, id)).submission.status).toBe("approved");
    const v = await versionOf(opened.correctionId);
    expect(
      (
        await outcomeOf(
          decide(db.knex, w.users.engineer, opened.correctionId, {
            decision: "approve",
            version: v,
            comment: "",
            confirmed: true,
          }),
        )
      ).ok,
    ).toBe(true);
    const old = await getSubmission(db.knex, w.users.engineer, id);
    expect(old.submission.status).toBe("superseded");
    const correction = await getSubmission(db.knex, w.users.engineer, opened.correctionId);
    expect(correction.submission.reference).toBe(old.submission.reference);
    expect(correction.submission.revision).toBe(old.submission.revision + 1);
    const reason = await db.knex("submissions").where({ id: opened.correctionId }).first("correction_reason");
    expect(reason.correction_reason).toBe("The lab re-weighed the coupon");
    const history = await revisionHistory(db.knex, w.users.engineer, opened.correctionId);
    expect(history.map((h) => h.revision)).toEqual([1, 2]);
  });
});

describe("the audit trail", () => {
  it("is append-only for the app and a tampered or removed row breaks the chain", async () => {
    await submittedSubmission();
    const [clean] = await verifyAuditChain(db.knex, w.owner.id);
    expect(clean.events).toBeGreaterThan(3);
    expect(clean.broken).toEqual([]);
    await expect(db.knex("audit_events").where({ owner_id: w.owner.id }).update({ reason: "x" })).rejects.toThrow(
      /permission denied|append-only/,
    );
    await expect(db.knex("audit_events").where({ owner_id: w.owner.id }).delete()).rejects.toThrow(
      /permission denied|append-only/,
    );

    // Someone with the table owner's rights switches the guard off and edits history.
    const victim = await db.knex("audit_events").where({ owner_id: w.owner.id }).orderBy("id").offset(1).first("id");
    const removed = await db.knex("audit_events").where({ owner_id: w.owner.id }).orderBy("id").offset(3).first("id");
    await db.knex.transaction(async (trx) => {
      await trx.raw("grant update, delete on audit_events to current_user");
      await trx.raw("alter table audit_events disable trigger audit_events_append_only");
      await trx("audit_events").where({ id: victim.id }).update({ actor_label: "someone else" });
      await trx("audit_events").where({ id: removed.id }).delete();
      await trx.raw("alter table audit_events enable trigger audit_events_append_only");
      await trx.raw("revoke update, delete on audit_events from current_user");
    });
    const [report] = await verifyAuditChain(db.knex, w.owner.id);
    expect(report.broken).toEqual(
      expect.arrayContaining([
        { id: String(victim.id), problem: expect.stringMatching(/edited/) },
        { id: expect.any(String), problem: expect.stringMatching(/removed/) },
      ]),
    );
  });
});

describe("the engineer's decision: warnings acknowledged, what becomes permanent confirmed", () => {
  it("refuses an approval naming every unanswered warning and the confirmation at once, and keeps the reasons", async () => {
    await db
      .knex("owner_settings")
      .insert({ owner_id: w.owner.id, photos_required: true })
      .onConflict("owner_id")
      .merge();
    try {
      // A coupon that gained mass (a warning) and has no photo while the owner asks for one (a warning).
      const serial = `R-${++serialNo}`;
      await w.coupon(serial);
      const start = 4000 - serialNo * 100;
      await recordExchange(db.knex, w.users.tech, w.point2, { installSerial: serial, installedAt: iso(start) });
      const removed = await outcomeOf(recordExchange(db.knex, w.users.tech, w.point2, { removedAt: iso(start - 90) }));
      if (!removed.ok || !removed.removedExposureId) throw new Error("removal failed");
      const saved = await outcomeOf(
        saveLabResult(
          db.knex,
          w.users.tech,
          removed.removedExposureId,
          lab(-0.01, { labNotes: "re-cleaned twice; the gain stays" }),
        ),
      );
      if (!saved.ok) throw new Error(JSON.stringify(saved.errors));
      const id = saved.submissionId;
      expect((await outcomeOf(submitForReview(db.knex, w.users.tech, id))).ok).toBe(true);
      const { results } = await couponSubmission(getSubmission(db.knex, w.users.engineer, id));
      const resultId = results[0].id;

      const refused = await outcomeOf(
        decide(db.knex, w.users.engineer, id, { decision: "approve", version: await versionOf(id), comment: "" }),
      );
      expect(refused.ok).toBe(false);
      expect(Object.keys(refused.ok ? {} : refused.errors).sort()).toEqual(
        [`ack.${resultId}.mass-gain`, `ack.${resultId}.no-photo`, "confirm"].sort(),
      );
      expect((await db.knex("submissions").where({ id }).first("status")).status).toBe("submitted");

      // One reason too short: still refused, and only that field named.
      const short = await outcomeOf(
        decide(db.knex, w.users.engineer, id, {
          decision: "approve",
          version: await versionOf(id),
          comment: "",
          confirmed: true,
          acknowledgements: { [`ack.${resultId}.mass-gain`]: "ok", [`ack.${resultId}.no-photo`]: "Photo on site file" },
        }),
      );
      expect(short.ok ? [] : Object.keys(short.errors)).toEqual([`ack.${resultId}.mass-gain`]);

      const approved = await outcomeOf(
        decide(db.knex, w.users.engineer, id, {
          decision: "approve",
          version: await versionOf(id),
          comment: "",
          confirmed: true,
          acknowledgements: {
            [`ack.${resultId}.mass-gain`]: "Scale deposit, lab confirmed after a third cycle",
            [`ack.${resultId}.no-photo`]: "Camera failed; photo on the site log",
          },
        }),
      );
      expect(approved.ok).toBe(true);
      const [revision] = await revisionHistory(db.knex, w.users.engineer, id);
      expect(revision.acknowledgements?.map((a) => [a.code, a.reason])).toEqual([
        ["mass-gain", "Scale deposit, lab confirmed after a third cycle"],
        ["no-photo", "Camera failed; photo on the site log"],
      ]);
      const event = await db
        .knex("audit_events")
        .where({ record_id: id, action: "submission.approved" })
        .first("after");
      expect(event.after.acknowledged).toEqual([
        `${serial} · mass-gain: Scale deposit, lab confirmed after a third cycle`,
        `${serial} · no-photo: Camera failed; photo on the site log`,
      ]);
    } finally {
      await db.knex("owner_settings").where({ owner_id: w.owner.id }).update({ photos_required: false });
    }
  });

  it("returns without reasons or confirmation", async () => {
    const { id } = await submittedSubmission();
    const returned = await outcomeOf(
      decide(db.knex, w.users.engineer, id, { decision: "return", version: await versionOf(id), comment: "Re-weigh" }),
    );
    expect(returned.ok).toBe(true);
  });
});

describe("the rework loop", () => {
  it("keeps the contractor's reply and the files with the new revision, and the waiting revision shows no old decision", async () => {
    const { id, exposureId } = await submittedSubmission();
    await decide(db.knex, w.users.engineer, id, {
      decision: "return",
      version: await versionOf(id),
      comment: "Attach the as-removed photo",
    });
    const [exposure] = await db.knex("coupon_exposures").where({ id: exposureId }).select("owner_id");
    const photoId = "0b9c6c1e-7f5a-4d6e-9a51-3c2f1b0e8d7a";
    await db.knex("attachments").insert({
      id: photoId,
      owner_id: exposure.owner_id,
      exposure_id: exposureId,
      kind: "as_removed",
      content_type: "image/jpeg",
      byte_size: 1000,
      sha256: "a".repeat(64),
      object_key: `owners/${exposure.owner_id}/exposures/${exposureId}/${photoId}/original`,
      original_name: "as-removed.jpg",
      state: "stored",
      uploaded_by: w.users.tech.id,
      uploaded_by_organisation_id: w.monitoring.id,
    });
    const long = await outcomeOf(submitForReview(db.knex, w.users.tech, id, undefined, "x".repeat(4001)));
    expect(long.ok ? null : long.errors.reply).toBe("Keep the reply under 4000 characters.");
    expect(
      (await outcomeOf(submitForReview(db.knex, w.users.tech, id, undefined, "  Photo attached as asked.  "))).ok,
    ).toBe(true);

    const { submission } = await getSubmission(db.knex, w.users.engineer, id);
    expect([submission.status, submission.decidedAt, submission.decisionComment, submission.decidedByName]).toEqual([
      "submitted",
      null,
      null,
      null,
    ]);
    const history = await revisionHistory(db.knex, w.users.engineer, id);
    expect(history.map((h) => [h.revision, h.decision, h.reply])).toEqual([
      [1, "returned", null],
      [2, null, "Photo attached as asked."],
    ]);
    expect(history[0].decidedByName).toBeTruthy();
    const changes = diffRevisions(history[0], history[1], () => "R");
    expect(changes).toContainEqual({
      coupon: "R",
      field: "as-removed photo",
      before: "—",
      after: "as-removed.jpg added",
    });
    // A kept revision's reply and files do not change afterwards.
    await expect(
      db.knex("submission_revisions").where({ submission_id: id, revision: 2 }).update({ reply: "edited" }),
    ).rejects.toThrow(/kept as it was/);
  });
});
