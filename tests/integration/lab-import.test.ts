import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { recordExchange } from "../../app/models/exposures.server";
import {
  importLabCsv,
  labTemplateCsv,
  type ImportRefusal,
  type ImportResult,
} from "../../app/models/lab-import.server";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, type World } from "../helpers/fixtures";
import { outcomeOf } from "../helpers/outcome";

let db: TestDatabase;
let w: World;
const iso = (daysAgo: number) => new Date(Date.now() - daysAgo * 86_400_000).toISOString();
const header = labTemplateCsv().trim();

/** A CSV line in template column order from a partial record (invented lab numbers). */
function line(values: Record<string, string>): string {
  return header
    .split(",")
    .map((c) => {
      const v = values[c] ?? "";
      return /[",\n]/.test(v) ? `"${v.replace(/"/g, '""')}"` : v;
    })
    .join(",");
}

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
});
