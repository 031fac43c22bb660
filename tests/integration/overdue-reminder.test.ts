import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { enqueueOverdueReminders, type ReminderRun } from "../../app/models/notifications.server";
import { createTestDatabase, type TestDatabase } from "../helpers/db";

/**
 * The morning reminder of overdue pulls runs every hour and sends each site's reminder
 * at 06:00 on that site's clock, once per site date, across clock changes.
 *
 * Check values come from the published daylight-saving rules for 2026:
 * - Europe/London (EU directive 2000/84/EC): BST (UTC+1) until 01:00 UTC on Sunday
 *   25 October, GMT (UTC+0) after — 06:00 local is 05:00 UTC, then 06:00 UTC.
 * - America/Chicago (15 U.S.C. 260a): CDT (UTC−5) until 02:00 local on Sunday
 *   1 November, CST (UTC−6) after — 06:00 local is 11:00 UTC, then 12:00 UTC.
 */

let t: TestDatabase;
let contractorId: string;
let chicago: string;
let london: string;

const HOUR = 3_600_000;

beforeAll(async () => {
  t = await createTestDatabase();
  const [owner, contractor] = await t
    .knex("organisations")
    .insert([
      { name: "Clockwise Owner", kind: "owner" },
      { name: "Meridian Monitoring", kind: "contractor" },
    ])
    .returning(["id"]);
  contractorId = contractor.id;
  const sites = await t
    .knex("sites")
    .insert([
      { owner_id: owner.id, name: "Lakeside Works", code: "LW", time_zone: "America/Chicago" },
      { owner_id: owner.id, name: "Thames Works", code: "TW", time_zone: "Europe/London" },
    ])
    .returning(["id"]);
  [chicago, london] = sites.map((s: { id: string }) => s.id);
  await t.knex("users").insert({
    organisation_id: contractorId,
    email: "tech@meridian.test",
    name: "Mel Tech",
    role: "contractor_technician",
    status: "active",
  });
  const [contract] = await t
    .knex("contracts")
    .insert({
      owner_id: owner.id,
      contractor_id: contractorId,
      reference: "CW-1",
      scope: ["coupon_monitoring"],
      starts_on: "2026-01-01",
    })
    .returning(["id"]);
  await t
    .knex("contract_sites")
    .insert(sites.map((s: { id: string }) => ({ contract_id: contract.id, site_id: s.id })));
  // One coupon per site, in since 1 June with a 30-day plan: overdue all autumn.
  for (const [i, siteId] of [chicago, london].entries()) {
    const [unit] = await t
      .knex("process_units")
      .insert({ site_id: siteId, tag: `U-${i}`, description: "" })
      .returning("id");
    const [circuit] = await t
      .knex("circuits")
      .insert({ unit_id: unit.id, site_id: siteId, tag: `C-${i}`, material_code: "carbon-steel" })
      .returning("id");
    const [point] = await t
      .knex("monitoring_points")
      .insert({
        owner_id: owner.id,
        site_id: siteId,
        circuit_id: circuit.id,
        tag: `CH-${i}`,
        planned_exposure_days: 30,
      })
      .returning("id");
    const [coupon] = await t
      .knex("coupons")
      .insert({
        owner_id: owner.id,
        serial: `CW-${i}`,
        material_code: "carbon-steel",
        density_g_cm3: 7.86,
        density_source: "ASTM G1 appendix (from memory)",
        shape: "strip",
        length_mm: 76.2,
        width_mm: 19.05,
        thickness_mm: 3.18,
        hole_diameter_mm: 7.94,
        initial_mass_g: 36.1234,
        balance_resolution_g: 0.0001,
      })
      .returning("id");
    await t.knex("coupon_exposures").insert({
      owner_id: owner.id,
      point_id: point.id,
      coupon_id: coupon.id,
      installed_at: "2026-06-01T12:00:00Z",
      installed_by_organisation_id: contractorId,
    });
  }
});

afterAll(async () => {
  await t?.drop();
});

const siteName = (siteId: string) => (siteId === chicago ? "Lakeside" : "Thames");

describe("the morning reminder at 06:00 site time", () => {
  it("runs hourly across both clock changes and sends each site's reminder at its 06:00, once per site date", async () => {
    // Every hour from 23 October 00:00 UTC to 3 November 00:00 UTC, as the hourly schedule runs.
    const sent: string[] = [];
    for (let at = Date.UTC(2026, 9, 23); at < Date.UTC(2026, 10, 3); at += HOUR) {
      const run = await enqueueOverdueReminders(t.knex, new Date(at));
      for (const r of run.reminders) sent.push(`${siteName(r.siteId)} ${r.day} at ${new Date(at).toISOString()}`);
    }
    expect(sent).toEqual([
      "Thames 2026-10-23 at 2026-10-23T05:00:00.000Z",
      "Lakeside 2026-10-23 at 2026-10-23T11:00:00.000Z",
      "Thames 2026-10-24 at 2026-10-24T05:00:00.000Z",
      "Lakeside 2026-10-24 at 2026-10-24T11:00:00.000Z",
      // London's clocks went back at 01:00 UTC: 06:00 GMT is 06:00 UTC
      "Thames 2026-10-25 at 2026-10-25T06:00:00.000Z",
      "Lakeside 2026-10-25 at 2026-10-25T11:00:00.000Z",
      "Thames 2026-10-26 at 2026-10-26T06:00:00.000Z",
      "Lakeside 2026-10-26 at 2026-10-26T11:00:00.000Z",
      "Thames 2026-10-27 at 2026-10-27T06:00:00.000Z",
      "Lakeside 2026-10-27 at 2026-10-27T11:00:00.000Z",
      "Thames 2026-10-28 at 2026-10-28T06:00:00.000Z",
      "Lakeside 2026-10-28 at 2026-10-28T11:00:00.000Z",
      "Thames 2026-10-29 at 2026-10-29T06:00:00.000Z",
      "Lakeside 2026-10-29 at 2026-10-29T11:00:00.000Z",
      "Thames 2026-10-30 at 2026-10-30T06:00:00.000Z",
      "Lakeside 2026-10-30 at 2026-10-30T11:00:00.000Z",
      "Thames 2026-10-31 at 2026-10-31T06:00:00.000Z",
      "Lakeside 2026-10-31 at 2026-10-31T11:00:00.000Z",
      // Chicago's clocks went back at 07:00 UTC: 06:00 CST is 12:00 UTC
      "Thames 2026-11-01 at 2026-11-01T06:00:00.000Z",
      "Lakeside 2026-11-01 at 2026-11-01T12:00:00.000Z",
      "Thames 2026-11-02 at 2026-11-02T06:00:00.000Z",
      "Lakeside 2026-11-02 at 2026-11-02T12:00:00.000Z",
    ]);

    // One message a site a day, each for its own site and date.
    const rows = await t.knex("email_outbox").orderBy("created_at").select("event_key", "to_email", "subject", "text");
    expect(rows).toHaveLength(22);
    expect(new Set(rows.map((r) => r.event_key)).size).toBe(22);
    expect(rows.every((r) => r.to_email === "tech@meridian.test")).toBe(true);
    const lakesideFirst = rows.find(
      (r) => r.event_key === `overdue.reminder:${contractorId}:${chicago}:2026-11-01:tech@meridian.test`,
    );
    expect(lakesideFirst?.subject).toBe("1 coupon pull overdue at Lakeside Works for Meridian Monitoring");
    expect(lakesideFirst?.text).toContain("CH-0");
    expect(lakesideFirst?.text).not.toContain("CH-1");
    // due 1 July 12:00 UTC (07:00 CDT); at 12:00 UTC on 1 November that is 31 + 31 + 30 + 31 = 123 days past due
    expect(lakesideFirst?.text).toMatch(/CH-0\s+C-0\s+CW-0\s+2026-07-01\s+123\n/);
    expect(lakesideFirst?.text).toContain("as of 2026-11-01 at the site");
  });

  it("makes up a run missed before noon, site time, and never sends before 06:00 or twice", async () => {
    const none: ReminderRun = { reminders: [], outboxIds: [] };
    // 3 November: nothing has run yet today. 05:59 GMT in London, 23:59 CST the day before in Chicago.
    expect(await enqueueOverdueReminders(t.knex, new Date("2026-11-03T05:59:00Z"))).toEqual(none);
    // The 06:00 run was missed (no worker up); at 09:30 GMT London's reminder is made up.
    const late = await enqueueOverdueReminders(t.knex, new Date("2026-11-03T09:30:00Z"));
    expect(late.reminders).toEqual([{ contractorId, siteId: london, day: "2026-11-03" }]);
    expect(late.outboxIds).toHaveLength(1);
    expect(await enqueueOverdueReminders(t.knex, new Date("2026-11-03T10:00:00Z"))).toEqual(none);
    // Chicago's whole morning was missed; at 12:00 CST (18:00 UTC) it is too late for today.
    expect(await enqueueOverdueReminders(t.knex, new Date("2026-11-03T18:00:00Z"))).toEqual(none);
  });

  it("sends once when two workers run the same hour at the same moment", async () => {
    const at = new Date("2026-11-04T12:00:00Z"); // 06:00 CST at Lakeside, 12:00 GMT at Thames (too late)
    const [a, b] = await Promise.all([enqueueOverdueReminders(t.knex, at), enqueueOverdueReminders(t.knex, at)]);
    expect([...a.reminders, ...b.reminders]).toEqual([{ contractorId, siteId: chicago, day: "2026-11-04" }]);
    expect([...a.outboxIds, ...b.outboxIds]).toHaveLength(1);
    expect(
      await t.knex("overdue_reminder_days").where({ contractor_id: contractorId, site_id: chicago, day: "2026-11-04" }),
    ).toHaveLength(1);
  });

  it("records a covered site's morning even with nothing overdue, and sends nothing for it", async () => {
    await t.knex("coupon_exposures").update({ removed_at: "2026-11-04T13:00:00Z" });
    const run = await enqueueOverdueReminders(t.knex, new Date("2026-11-05T06:00:00Z")); // 06:00 GMT at Thames
    expect(run).toEqual({ reminders: [{ contractorId, siteId: london, day: "2026-11-05" }], outboxIds: [] });
    expect(await enqueueOverdueReminders(t.knex, new Date("2026-11-05T07:00:00Z"))).toEqual({
      reminders: [],
      outboxIds: [],
    });
  });
});
