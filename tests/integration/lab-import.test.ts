import { afterAll, beforeAll, describe, expect, it } from "vitest";
import type { Knex } from "knex";
import { verifyAuditChain } from "../../app/models/audit.server";
import { recordExchange } from "../../app/models/exposures.server";
import {
  importLabCsv,
  labTemplateCsv,
  type ImportRefusal,
  type ImportResult,
} from "../../app/models/lab-import.server";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { submitForReview } from "../../app/models/submissions.server";
import { buildWorld, createCircuit, createCouponPoint, type World } from "../helpers/fixtures";
import { labCsv, labCsvLine, labRecordFor, removedCouponsWaiting } from "../helpers/lab-work";
import { outcomeOf } from "../helpers/outcome";

let db: TestDatabase;
let w: World;
const iso = (daysAgo: number) => new Date(Date.now() - daysAgo * 86_400_000).toISOString();
const header = labTemplateCsv().trim();

const line = labCsvLine;

beforeAll(async () => {
  db = await createTestDatabase();
  w = await buildWorld(db.knex);
  for (const [i, serial] of ["L-1", "L-2"].entries()) {
    await w.coupon(serial);
    const point = i === 0 ? w.point : w.point2;
    expect(
      (await outcomeOf(recordExchange(db.knex, w.users.tech, point, { installSerial: serial, installedAt: iso(100) })))
        .ok,
    ).toBe(true);
    expect((await outcomeOf(recordExchange(db.knex, w.users.tech, point, { removedAt: iso(5) }))).ok).toBe(true);
  }
});
afterAll(async () => {
  await db?.drop();
});

const good = [
  line({
    coupon_serial: "L-1",
    cleaning_method: "inhibited HCl, 3 cycles",
    coupon_mass_cycle1_g: "35.9",
    coupon_mass_cycle2_g: "35.8985",
    pit_depths_mm: "0.1 0.08",
  }),
  line({
    coupon_serial: "L-2",
    cleaning_method: "citric acid, then brush",
    final_mass_g: "35.95",
    lab_notes: "edges rounded, see sheet",
  }),
];

describe("importing lab results from CSV", () => {
  it("rejects the whole file when one row is wrong, naming line and column, and saves nothing", async () => {
    const csv = [
      header,
      good[0],
      line({ coupon_serial: "L-2", final_mass_g: "35,95" }),
      line({ coupon_serial: "NOPE", final_mass_g: "35.9" }),
    ].join("\n");
    const result = await outcomeOf<ImportResult, ImportRefusal>(importLabCsv(db.knex, w.users.tech, csv));
    expect(result.ok).toBe(false);
    if (result.ok) return;
    expect(result.problems).toEqual([
      { line: 3, column: "final_mass_g", message: expect.stringMatching(/decimal comma.*35\.95/) },
    ]);
    const later = await outcomeOf<ImportResult, ImportRefusal>(
      importLabCsv(
        db.knex,
        w.users.tech,
        [header, good[0], line({ coupon_serial: "NOPE", final_mass_g: "35.9" })].join("\n"),
      ),
    );
    expect(later.ok === false && later.problems).toEqual([
      { line: 3, column: "coupon_serial", message: expect.stringMatching(/No coupon NOPE/) },
    ]);
    expect(await db.knex("coupon_results").count({ n: "*" }).first()).toEqual({ n: "0" });
    expect(await db.knex("submissions").count({ n: "*" }).first()).toEqual({ n: "0" });
  });

  it("reads a byte-order mark, CRLF line ends and quoted commas, and saves every row", async () => {
    const csv = `\uFEFF${[header, ...good].join("\r\n")}\r\n`;
    const result = await outcomeOf<ImportResult, ImportRefusal>(importLabCsv(db.knex, w.users.tech, csv));
    expect(result.ok).toBe(true);
    if (!result.ok) return;
    expect(result.rows.map((r) => [r.line, r.serial, r.status])).toEqual([
      [2, "L-1", "saved"],
      [3, "L-2", "saved"],
    ]);
    expect(result.notes.join(" ")).toMatch(/byte-order mark/);
    const notes = await db.knex("coupon_results").whereNot("lab_notes", "").first("lab_notes");
    expect(notes.lab_notes).toBe("edges rounded, see sheet");
  });

  it("recognises a re-import of the same rows instead of duplicating them", async () => {
    const events = Number((await db.knex("audit_events").count({ n: "*" }).first())!.n);
    const again = await outcomeOf<ImportResult, ImportRefusal>(
      importLabCsv(db.knex, w.users.tech, [header, ...good].join("\n")),
    );
    expect(again.ok && again.rows.map((r) => r.status)).toEqual(["unchanged", "unchanged"]);
    expect(await db.knex("coupon_results").count({ n: "*" }).first()).toEqual({ n: "2" });
    expect(Number((await db.knex("audit_events").count({ n: "*" }).first())!.n)).toBe(events);
  });

  it("refuses unknown columns and files without rows", async () => {
    const unknown = await outcomeOf<ImportResult, ImportRefusal>(
      importLabCsv(db.knex, w.users.tech, `${header},colour\n${good[0]},red`),
    );
    expect(unknown.ok === false && unknown.problems[0]).toMatchObject({ line: 1, column: "colour" });
    const empty = await outcomeOf<ImportResult, ImportRefusal>(importLabCsv(db.knex, w.users.tech, `${header}\n`));
    expect(empty.ok === false && empty.problems[0].message).toMatch(/no rows/);
  });

  it("issues a bounded number of queries, the same for 200 rows as for 20, and keeps the audit chain whole", async () => {
    const count = async (records: Array<Record<string, string>>) => {
      let queries = 0;
      const listener = () => void (queries += 1);
      db.knex.on("query", listener);
      try {
        const result = await outcomeOf<ImportResult, ImportRefusal>(
          importLabCsv(db.knex, w.users.tech, labCsv(records)),
        );
        return { result, queries };
      } finally {
        db.knex.off("query", listener);
      }
    };
    const few = await removedCouponsWaiting(db.knex, w, "Q20", 20);
    const many = await removedCouponsWaiting(db.knex, w, "Q200", 200);
    const draft = await db.knex("submissions").where({ status: "draft" }).first("id", "version");
    const events = Number((await db.knex("audit_events").count({ n: "*" }).first())!.n);

    const small = await count(few.map((s, i) => labRecordFor(s, i)));
    const large = await count(many.map((s, i) => labRecordFor(s, i)));
    expect(small.result.ok && small.result.rows.every((r) => r.status === "saved" && r.submissionId === draft.id)).toBe(
      true,
    );
    expect(large.result.ok && large.result.rows.filter((r) => r.status === "saved").length).toBe(200);
    expect(large.queries).toBeLessThan(30);
    expect(large.queries).toBe(small.queries);
    // One version step per import and submission; one audit event per row.
    expect((await db.knex("submissions").where({ id: draft.id }).first("version")).version).toBe(draft.version + 2);
    expect(Number((await db.knex("audit_events").count({ n: "*" }).first())!.n)).toBe(events + 220);
    expect(await db.knex("coupon_results").where({ submission_id: draft.id }).count({ n: "*" }).first()).toEqual({
      n: "222",
    });

    // Editing all 200 in a second file: the update path, each event with the lab numbers it replaced.
    const edited = many.map((s, i) => ({
      ...labRecordFor(s, i),
      coupon_mass_cycle3_g: "35.80",
      lab_notes: "re-weighed",
    }));
    const again = await count(edited);
    expect(again.result.ok && again.result.rows.map((r) => r.status)).toEqual(many.map(() => "saved"));
    expect(again.queries).toBeLessThan(30);
    const last = await db.knex("audit_events").orderBy("id", "desc").first("action", "before", "after");
    expect(last.action).toBe("lab_result.edited");
    expect(last.after).toMatchObject({ coupon: "Q200-200", lab: { couponMassesG: expect.arrayContaining([35.8]) } });
    expect(last.before.lab.couponMassesG).toEqual([
      Number(labRecordFor("Q200-200", 199).coupon_mass_cycle1_g),
      Number(labRecordFor("Q200-200", 199).coupon_mass_cycle2_g),
      Number(labRecordFor("Q200-200", 199).coupon_mass_cycle3_g),
    ]);
    const stored = await db
      .knex("coupon_results as r")
      .join("coupon_exposures as e", "e.id", "r.exposure_id")
      .join("coupons as c", "c.id", "e.coupon_id")
      .where("c.serial", "Q200-7")
      .first("r.inputs", "r.lab_notes", "r.coupon_masses_g");
    expect(stored.inputs.text.couponMassesG).toEqual([
      labRecordFor("Q200-7", 6).coupon_mass_cycle1_g,
      labRecordFor("Q200-7", 6).coupon_mass_cycle2_g,
      "35.80",
    ]);
    expect(stored.lab_notes).toBe("re-weighed");
    expect(stored.coupon_masses_g.map(Number)).toEqual(stored.inputs.lab.couponMassesG);
    const [chain] = await verifyAuditChain(db.knex, w.owner.id);
    expect(chain.broken).toEqual([]);
  });

  it("refuses, by line, coupons already submitted, outside the contracts and ambiguous across owners", async () => {
    const removedAt = async (knex: Knex, ownerId: string, pointId: string, serial: string, days: [number, number]) => {
      const [c] = await knex("coupons")
        .insert({ ...(await knex("coupons").where({ serial: "L-1" }).first(couponSpec)), owner_id: ownerId, serial })
        .returning("id");
      await knex("coupon_exposures").insert({
        owner_id: ownerId,
        point_id: pointId,
        coupon_id: c.id,
        installed_at: iso(days[0]),
        installed_by: w.users.tech.id,
        installed_by_organisation_id: w.monitoring.id,
        removed_at: iso(days[1]),
        removed_by: w.users.tech.id,
        removed_by_organisation_id: w.monitoring.id,
      });
    };
    const outside = { id: w.site2.id, name: "Plant B", code: w.site2.code, timeZone: w.site2.time_zone };
    const foreign = { id: w.foreignSite.id, name: "Plant Z", code: w.foreignSite.code, timeZone: "Europe/London" };
    const outsidePoint = await createCouponPoint(
      db.knex,
      w.owner,
      outside,
      await createCircuit(db.knex, outside, { unitTag: "U-B", circuitTag: "C-B" }),
      { tag: "PB-CH-1", plannedExposureDays: 60 },
    );
    const foreignPoint = await createCouponPoint(
      db.knex,
      w.owner2,
      foreign,
      await createCircuit(db.knex, foreign, { unitTag: "U-Z", circuitTag: "C-Z" }),
      { tag: "PZ-CH-1", plannedExposureDays: 60 },
    );
    await removedAt(db.knex, w.owner.id, outsidePoint, "L-OUT", [60, 30]);
    await removedAt(db.knex, w.owner.id, outsidePoint, "L-AMB", [30, 3]);
    await removedAt(db.knex, w.owner2.id, foreignPoint, "L-AMB", [30, 3]);

    const draft = await db.knex("submissions").where({ status: "draft" }).first("id", "reference");
    expect((await outcomeOf(submitForReview(db.knex, w.users.tech, draft.id))).ok).toBe(true);
    const results = await db.knex("coupon_results").count({ n: "*" }).first();
    const refused = await outcomeOf<ImportResult, ImportRefusal>(
      importLabCsv(
        db.knex,
        w.users.tech,
        [
          header,
          line({ coupon_serial: "L-AMB", final_mass_g: "35.9" }),
          line({ coupon_serial: "L-1", final_mass_g: "35.9" }),
          line({ coupon_serial: "L-OUT", final_mass_g: "35.9" }),
        ].join("\n"),
      ),
    );
    expect(refused.ok === false && refused.problems).toEqual([
      { line: 2, column: "coupon_serial", message: "Coupon serial L-AMB is ambiguous across owners." },
      {
        line: 3,
        column: "coupon_serial",
        message: `Coupon L-1 is already in submission ${draft.reference} (submitted).`,
      },
      {
        line: 4,
        column: "coupon_serial",
        message: "Coupon L-OUT is not at a site your company's contracts cover today.",
      },
    ]);
    expect(await db.knex("coupon_results").count({ n: "*" }).first()).toEqual(results);
  });
});

const couponSpec = [
  "material_code",
  "density_g_cm3",
  "density_source",
  "shape",
  "length_mm",
  "width_mm",
  "thickness_mm",
  "hole_diameter_mm",
  "initial_mass_g",
  "balance_resolution_g",
];
