import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { createTestDatabase, type TestDatabase } from "../helpers/db";

let db: TestDatabase;
beforeAll(async () => {
  db = await createTestDatabase();
});
afterAll(async () => {
  await db?.drop();
});

describe("organisations and sites", () => {
  it("starts empty: nothing comes from the demo seed", async () => {
    const [{ count }] = await db.knex("organisations").count<{ count: string }[]>({ count: "*" });
    expect(Number(count)).toBe(0);
  });

  it("keeps a site code unique per owner but allows the same code at another owner", async () => {
    const [a, b] = await db
      .knex("organisations")
      .insert([
        { name: "Owner A", kind: "owner" },
        { name: "Owner B", kind: "owner" },
      ])
      .returning("id");
    await db.knex("sites").insert({ owner_id: a.id, name: "Plant one", code: "P1", time_zone: "UTC" });
    await db.knex("sites").insert({ owner_id: b.id, name: "Plant one", code: "P1", time_zone: "UTC" });
    await expect(
      db.knex("sites").insert({ owner_id: a.id, name: "Another", code: "P1", time_zone: "UTC" }),
    ).rejects.toThrow(/sites_owner_code_key/);
  });

  it("refuses an unknown organisation kind and a site owned by a contractor", async () => {
    await expect(db.knex("organisations").insert({ name: "X", kind: "vendor" })).rejects.toThrow(
      /organisations_kind_check/,
    );
    const [c] = await db.knex("organisations").insert({ name: "Contractor", kind: "contractor" }).returning("id");
    await expect(
      db.knex("sites").insert({ owner_id: c.id, name: "Nope", code: "NO", time_zone: "UTC" }),
    ).rejects.toThrow(/kind owner/);
  });
});
