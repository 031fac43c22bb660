import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { verifyAuditChain, type Actor } from "../../app/models/audit.server";
import { listCircuits } from "../../app/models/circuits.server";
import { cmlsOfCircuits } from "../../app/models/cmls.server";
import { describeProblem, type CsvRefusal } from "../../app/models/coupon-import.server";
import {
  cmlCsvTemplate,
  designCsvTemplate,
  importCircuitDesign,
  importCmls,
  type SiteImportResult,
} from "../../app/models/design-import.server";
import { createUnit } from "../../app/models/process-units.server";
import { createSite } from "../../app/models/sites.server";
import { NotFoundInTenant } from "../../app/services/outcome";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { outcomeOf } from "../helpers/outcome";

/** CSV imports of circuit design data and CMLs: line-by-line problems, all or nothing, idempotent, set-wise. */

let db: TestDatabase;
let ownerA: string;
let ownerB: string;
let engineerA: Actor;
let engineerB: Actor;
let siteA: string;
let siteA2: string;
let siteB: string;

beforeAll(async () => {
  db = await createTestDatabase();
  const [a, b] = await db
    .knex("organisations")
    .insert([
      { name: "Halvard Petroleum", kind: "owner" },
      { name: "Osterby Chemicals", kind: "owner" },
    ])
    .returning("id");
  ownerA = a.id;
  ownerB = b.id;
  const [ua, ub] = await db
    .knex("users")
    .insert([
      { organisation_id: ownerA, email: "engineer@halvard.example", role: "integrity_engineer", status: "active" },
      { organisation_id: ownerB, email: "engineer@osterby.example", role: "integrity_engineer", status: "active" },
    ])
    .returning(["id", "email"]);
  engineerA = { userId: ua.id, organisationId: ownerA, label: ua.email };
  engineerB = { userId: ub.id, organisationId: ownerB, label: ub.email };
  const site = async (ownerId: string, actor: Actor, code: string, units: string[]) => {
    const s = await outcomeOf(createSite(db.knex, ownerId, actor, { name: `Plant ${code}`, code, time_zone: "UTC" }));
    if (!s.ok) throw new Error(JSON.stringify(s.errors));
    for (const tag of units) await outcomeOf(createUnit(db.knex, ownerId, actor, s.id, { tag, description: "" }));
    return s.id;
  };
  siteA = await site(ownerA, engineerA, "DI1", ["U-100", "U-310"]);
  siteA2 = await site(ownerA, engineerA, "DI2", ["U-9"]);
  siteB = await site(ownerB, engineerB, "DI3", ["U-100"]);
});
afterAll(async () => {
  await db?.drop();
});

const designHeader =
  "circuit_tag,unit_tag,material,nps,schedule,outside_diameter_mm,nominal_wall_mm,design_pressure_mpa,design_temperature_c,allowable_stress_mpa,joint_factor_e,corrosion_allowance_mm,piping_class";
/** Invented lines: NPS 6 Sch 40 and NPS 4 Sch 80 carbon steel. */
const designCsv = [
  designHeader,
  "OVHD-1,U-100,carbon-steel,6,40,,,0.35,150,138,1,3,2",
  "FEED-1,U-310,carbon-steel,4,80,114.3,8.56,9.5,120,138,1,3,2",
].join("\r\n");

const cmlHeader = "circuit_tag,cml_tag,location,component,injection_point,baseline_mm,baseline_date";
const cmlCsv = [
  cmlHeader,
  "OVHD-1,OVHD-1-E01,first elbow,elbow,no,7.02,2019-05-14",
  "OVHD-1,OVHD-1-N02,downstream of the injection quill,nozzle,yes,,",
  "FEED-1,FEED-1-T01,tee to the pumps,Tee,,8.4,2004-06-01",
].join("\r\n");

const events = async (ownerId: string) =>
  Number((await db.knex("audit_events").where({ owner_id: ownerId }).count<{ n: string }[]>({ n: "*" }))[0].n);
const run = (call: Promise<SiteImportResult>) => outcomeOf<SiteImportResult, CsvRefusal>(call);

describe("circuit design import", () => {
  it("refuses a file with problems whole, naming each line and column", async () => {
    const before = await events(ownerA);
    const r = await run(
      importCircuitDesign(
        db.knex,
        ownerA,
        engineerA,
        siteA,
        [
          designHeader,
          "OVHD-1,U-100,carbon-steel,6,40,,,0.35,150,138,1,3,2",
          "BAD-1,U-999,carbon-steel,6,40,,,0.35,150,138,1.5,3,2",
          "BAD-2,U-100,,6 1/2x,40,,,,,,,,7",
          "OVHD-1,U-100,carbon-steel,6,40,,,0.35,150,138,1,3,2",
        ].join("\n"),
      ),
    );
    expect(r.ok).toBe(false);
    if (r.ok) return;
    const said = r.problems.map(describeProblem);
    expect(said).toEqual([
      expect.stringMatching(/^line 3, unit_tag: This site has no process unit tagged U-999/),
      expect.stringMatching(/^line 3, joint_factor_e: /),
      expect.stringMatching(/^line 4, material: A new circuit \(BAD-2\) needs its material/),
      expect.stringMatching(/^line 4, nps: Write the NPS as a size/),
      expect.stringMatching(/^line 4, piping_class: Choose the piping class/),
      expect.stringMatching(/^line 5, circuit_tag: The circuit OVHD-1 is already on line 2 of this file/),
    ]);
    expect(await listCircuits(db.knex, ownerA, siteA)).toEqual([]);
    expect(await events(ownerA)).toBe(before);
  });

  it("adds circuits with table dimensions, then says nothing changed when the same file comes again", async () => {
    const before = await events(ownerA);
    const first = await run(importCircuitDesign(db.knex, ownerA, engineerA, siteA, designCsv));
    expect(first).toEqual({ ok: true, created: ["OVHD-1", "FEED-1"], updated: [], unchanged: 0 });
    const list = await listCircuits(db.knex, ownerA, siteA);
    // NPS 6: OD 168.3 mm, Sch 40 7.11 mm — ASME B36.10M (from memory).
    expect(list.find((c) => c.tag === "OVHD-1")).toMatchObject({
      outside_diameter_mm: 168.3,
      nominal_wall_mm: 7.11,
      outside_diameter_from_table: true,
      unit_tag: "U-100",
      mill_tolerance_pct: 12.5,
    });
    expect(await events(ownerA)).toBe(before + 3);
    // one event per circuit added, and one for the import on the site's trail
    const again = await run(importCircuitDesign(db.knex, ownerA, engineerA, siteA, designCsv));
    expect(again).toEqual({ ok: true, created: [], updated: [], unchanged: 2 });
    expect(await events(ownerA)).toBe(before + 3);
  });

  it("updates what a line changes, empties what it leaves empty, and keeps the circuit's service", async () => {
    await db.knex("circuits").where({ tag: "FEED-1" }).update({ service: "sour water" });
    const r = await run(
      importCircuitDesign(
        db.knex,
        ownerA,
        engineerA,
        siteA,
        [designHeader, "FEED-1,U-310,,4,80,114.3,8.56,9.5,120,138,1,,3"].join("\n"),
      ),
    );
    expect(r).toEqual({ ok: true, created: [], updated: ["FEED-1"], unchanged: 0 });
    const c = (await listCircuits(db.knex, ownerA, siteA)).find((x) => x.tag === "FEED-1")!;
    expect(c).toMatchObject({ corrosion_allowance_mm: null, piping_class: 3, service: "sour water" });
    const moved = await run(
      importCircuitDesign(db.knex, ownerA, engineerA, siteA, [designHeader, "FEED-1,U-100,,4,80"].join("\n")),
    );
    expect(moved.ok === false && moved.problems.map(describeProblem)).toEqual([
      "line 2, unit_tag: Circuit FEED-1 is in unit U-310; move it on the site page, not by import.",
    ]);
  });

  it("is a 404 for another owner's site", async () => {
    await expect(importCircuitDesign(db.knex, ownerB, engineerB, siteA, designCsv)).rejects.toBeInstanceOf(
      NotFoundInTenant,
    );
  });

  it("offers a template that imports as it stands at a site with those units", async () => {
    const r = await run(importCircuitDesign(db.knex, ownerB, engineerB, siteB, designCsvTemplate()));
    expect(r.ok).toBe(false);
    if (!r.ok) expect(r.problems.map((p) => p.column)).toEqual(["unit_tag"]);
    await outcomeOf(createUnit(db.knex, ownerB, engineerB, siteB, { tag: "U-310", description: "" }));
    expect(await run(importCircuitDesign(db.knex, ownerB, engineerB, siteB, designCsvTemplate()))).toMatchObject({
      ok: true,
      created: ["CDU-OVHD-01", "SWS-BTMS-01"],
    });
  });
});

describe("CML import", () => {
  it("refuses problems by line and column, writing nothing", async () => {
    const future = new Date(Date.now() + 5 * 86_400_000).toISOString().slice(0, 10);
    const r = await run(
      importCmls(
        db.knex,
        ownerA,
        engineerA,
        siteA,
        [
          cmlHeader,
          "OVHD-1,OVHD-1-E01,first elbow,elbow,no,7.02,2019-05-14",
          "NOPE-1,X-1,,pipe,,,",
          "OVHD-1,X-2,,bend,maybe,7;2,2019-02-30",
          `OVHD-1,X-3,,pipe,,,${future}`,
          "OVHD-1,OVHD-1-E01,,pipe,,,",
        ].join("\n"),
      ),
    );
    expect(r.ok).toBe(false);
    if (r.ok) return;
    expect(r.problems.map(describeProblem)).toEqual([
      "line 3, circuit_tag: This site has no circuit tagged NOPE-1.",
      expect.stringMatching(/^line 4, component: /),
      "line 4, injection_point: Write yes or no (or leave it empty for no).",
      expect.stringMatching(/^line 4, baseline_mm: /),
      expect.stringMatching(/^line 4, baseline_date: /),
      expect.stringMatching(/^line 5, baseline_date: The base-line date .* is after today/),
      "line 6, cml_tag: The CML OVHD-1-E01 is already on line 2 of this file.",
    ]);
    expect(await db.knex("cmls").where({ owner_id: ownerA })).toEqual([]);
  });

  it("adds CMLs, says nothing changed the second time, and updates a changed line", async () => {
    const circuits = await listCircuits(db.knex, ownerA, siteA);
    const first = await run(importCmls(db.knex, ownerA, engineerA, siteA, cmlCsv));
    expect(first).toEqual({ ok: true, created: ["OVHD-1-E01", "OVHD-1-N02", "FEED-1-T01"], updated: [], unchanged: 0 });
    const cmls = await cmlsOfCircuits(
      db.knex,
      ownerA,
      circuits.map((c) => c.id),
    );
    expect(cmls.find((m) => m.tag === "OVHD-1-N02")).toMatchObject({
      injectionPoint: true,
      component: "nozzle",
      // 7.11 mm × (1 − 12.5/100) = 6.221 mm, from the definition of a mill under-tolerance.
      baseline: { source: "nominal-less-tolerance", thicknessMm: 6.221 },
    });
    expect(cmls.find((m) => m.tag === "FEED-1-T01")).toMatchObject({ component: "tee", recordedBaselineMm: 8.4 });
    const again = await run(importCmls(db.knex, ownerA, engineerA, siteA, cmlCsv));
    expect(again).toEqual({ ok: true, created: [], updated: [], unchanged: 3 });
    const changed = await run(
      importCmls(
        db.knex,
        ownerA,
        engineerA,
        siteA,
        cmlCsv.replace("first elbow,elbow,no,7.02", "first elbow outer radius,elbow,no,7.05"),
      ),
    );
    expect(changed).toEqual({ ok: true, created: [], updated: ["OVHD-1-E01"], unchanged: 2 });
  });

  it("refuses a tag used at another site of the owner, or a CML moved to another circuit", async () => {
    await run(
      importCircuitDesign(db.knex, ownerA, engineerA, siteA2, [designHeader, "OTHER-1,U-9,carbon-steel"].join("\n")),
    );
    const elsewhere = await run(
      importCmls(db.knex, ownerA, engineerA, siteA2, [cmlHeader, "OTHER-1,OVHD-1-E01,,pipe,,,"].join("\n")),
    );
    expect(elsewhere.ok === false && elsewhere.problems.map(describeProblem)).toEqual([
      "line 2, cml_tag: The CML tag OVHD-1-E01 is already used at another of your sites; CML tags are unique across them.",
    ]);
    const moved = await run(
      importCmls(db.knex, ownerA, engineerA, siteA, [cmlHeader, "FEED-1,OVHD-1-E01,,elbow,,,"].join("\n")),
    );
    expect(moved.ok === false && moved.problems[0].message).toMatch(/is on circuit OVHD-1; a CML is not moved/);
    // Another owner may use the same tag.
    const other = await run(
      importCmls(db.knex, ownerB, engineerB, siteB, [cmlHeader, "CDU-OVHD-01,OVHD-1-E01,,pipe,,,"].join("\n")),
    );
    expect(other).toMatchObject({ ok: true, created: ["OVHD-1-E01"] });
  });

  it("issues the same few queries for 200 lines as for 20, and keeps the audit chain whole", async () => {
    const lines = (prefix: string, n: number) =>
      [cmlHeader, ...Array.from({ length: n }, (_, i) => `OVHD-1,${prefix}-${i},spot ${i},pipe,no,7.0${i % 10},`)].join(
        "\n",
      );
    const count = async (csv: string) => {
      let queries = 0;
      const listener = () => void (queries += 1);
      db.knex.on("query", listener);
      try {
        const result = await run(importCmls(db.knex, ownerA, engineerA, siteA, csv));
        return { result, queries };
      } finally {
        db.knex.off("query", listener);
      }
    };
    const few = await count(lines("Q20", 20));
    const many = await count(lines("Q200", 200));
    expect(few.result.ok && many.result.ok).toBe(true);
    expect(many.queries).toBe(few.queries);
    expect(many.queries).toBeLessThan(15);
    const [report] = await verifyAuditChain(db.knex, ownerA);
    expect(report.broken).toEqual([]);
  });

  it("offers a template whose lines import at a site with those circuits", async () => {
    const r = await run(importCmls(db.knex, ownerB, engineerB, siteB, cmlCsvTemplate()));
    expect(r).toMatchObject({ ok: true, created: ["OVHD-01-E02", "OVHD-01-N03"] });
  });
});
