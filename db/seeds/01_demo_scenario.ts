import type { Knex } from "knex";
import { demoUsers } from "../../fake-services/demo-users";

/**
 * The demo scenario: an invented owner with two plants, a second unrelated owner,
 * and two contractor companies. Every company, plant, person and tag is invented.
 * Loaded by `npm start` into an empty database, or by `npm run db:reset`.
 */
const nameOf = (email: string) => demoUsers.find((u) => u.email === email)?.name ?? "";

/** A date relative to today, so the scenario stays current whenever it is loaded. */
const daysFromToday = (days: number) => new Date(Date.now() + days * 86_400_000).toISOString().slice(0, 10);

export async function seed(knex: Knex): Promise<void> {
  const [{ count }] = await knex("organisations").count<{ count: string }[]>({ count: "*" });
  if (Number(count) > 0) {
    console.log(
      "The database already holds data; the demo scenario was not loaded. Use `npm run db:reset` to start over.",
    );
    return;
  }
  await knex.transaction(async (trx) => {
    const [owner, owner2, monitoring, inspection] = await trx("organisations")
      .insert([
        { name: "Norvale Energy", kind: "owner" },
        { name: "Calder Water Utilities", kind: "owner" },
        { name: "Quillon Corrosion Services", kind: "contractor" },
        { name: "Ferrule Inspection Ltd", kind: "contractor" },
      ])
      .returning(["id", "name"]);
    const [brackwater, tarn] = await trx("sites")
      .insert([
        { owner_id: owner.id, name: "Brackwater Refinery", code: "BWR", time_zone: "America/Chicago" },
        { owner_id: owner.id, name: "Tarn Hollow Gas Plant", code: "THG", time_zone: "America/Denver" },
        { owner_id: owner2.id, name: "Mossgiel Treatment Works", code: "MTW", time_zone: "Europe/London" },
      ])
      .returning(["id"]);

    const people: Array<{
      email: string;
      organisation_id: string;
      role: string;
      status: string;
      invited_by_organisation_id?: string;
    }> = [
      { email: "admin@owner.example", organisation_id: owner.id, role: "administrator", status: "active" },
      { email: "engineer@owner.example", organisation_id: owner.id, role: "integrity_engineer", status: "active" },
      { email: "manager@owner.example", organisation_id: owner.id, role: "plant_manager", status: "active" },
      { email: "unverified@owner.example", organisation_id: owner.id, role: "plant_manager", status: "invited" },
      { email: "engineer@owner2.example", organisation_id: owner2.id, role: "integrity_engineer", status: "active" },
      {
        email: "tech@monitoring.example",
        organisation_id: monitoring.id,
        role: "contractor_technician",
        status: "active",
        invited_by_organisation_id: owner.id,
      },
      {
        email: "tech@inspection.example",
        organisation_id: inspection.id,
        role: "contractor_technician",
        status: "active",
        invited_by_organisation_id: owner.id,
      },
    ];
    const users = await trx("users")
      .insert(people.map((p) => ({ ...p, name: nameOf(p.email) })))
      .returning(["id", "email"]);
    const admin = users.find((u) => u.email === "admin@owner.example")!;

    const contracts = await trx("contracts")
      .insert([
        {
          owner_id: owner.id,
          contractor_id: monitoring.id,
          reference: "NVE-CM-2024-017",
          scope: ["coupon_monitoring"],
          starts_on: daysFromToday(-760),
          ends_on: null,
        },
        {
          owner_id: owner.id,
          contractor_id: inspection.id,
          reference: "NVE-UT-2025-004",
          scope: ["thickness_inspection"],
          starts_on: daysFromToday(-400),
          ends_on: daysFromToday(330),
        },
        {
          owner_id: owner.id,
          contractor_id: inspection.id,
          reference: "NVE-UT-2024-021",
          scope: ["thickness_inspection"],
          starts_on: daysFromToday(-700),
          ends_on: daysFromToday(-60),
        },
      ])
      .returning(["id", "reference"]);
    const byRef = (r: string) => contracts.find((c) => c.reference === r)!.id;
    await trx("contract_sites").insert([
      { contract_id: byRef("NVE-CM-2024-017"), site_id: brackwater.id },
      { contract_id: byRef("NVE-CM-2024-017"), site_id: tarn.id },
      { contract_id: byRef("NVE-UT-2025-004"), site_id: brackwater.id },
      { contract_id: byRef("NVE-UT-2024-021"), site_id: tarn.id },
    ]);

    await trx("audit_events").insert({
      owner_id: owner.id,
      actor_user_id: admin.id,
      actor_organisation_id: owner.id,
      actor_label: "demo seed",
      action: "scenario.loaded",
      record_type: "organisation",
      record_id: owner.id,
      after: JSON.stringify({ sites: 2, contracts: contracts.length, people: people.length - 1 }),
      hash: "",
    });
  });
}
