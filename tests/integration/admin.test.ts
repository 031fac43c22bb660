import { createHash } from "node:crypto";
import { parse } from "csv-parse/sync";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { auditChanges } from "~/services/audit-words";
import type { SessionUser } from "~/context";
import { createApiClient, lookUpApiToken, listApiClients, revokeApiClient } from "~/models/api-clients.server";
import { auditCsvHeader, auditToCsv, listAudit, recordAudit, verifyAuditChain } from "~/models/audit.server";
import {
  contractCalendar,
  createContract,
  endContract,
  getContract,
  listContracts,
  updateContract,
} from "~/models/contracts.server";
import { changeMemberRole, inviteMember, listMembers, setMemberAccess } from "~/models/users.server";
import { env } from "~/services/env.server";
import { Forbidden, Invalid, NotFoundInTenant, type FieldErrors } from "~/services/outcome";
import { createTestDatabase, type TestDatabase } from "../helpers/db";

let t: TestDatabase;
let ownerA: { id: string; name: string };
let ownerB: { id: string; name: string };
let contractor: { id: string; name: string };
let strangerContractor: { id: string; name: string };
let sitesA: Array<{ id: string; code: string }>;
let siteB: { id: string };
let adminA: SessionUser;
let adminB: SessionUser;
let engineerA: { id: string; email: string };
let today: string;
let yesterday: string;

const addDays = (iso: string, days: number) =>
  new Date(Date.parse(`${iso}T00:00:00Z`) + days * 86_400_000).toISOString().slice(0, 10);

async function person(org: { id: string; name: string }, email: string, role: SessionUser["role"], extra: object = {}) {
  const [row] = await t
    .knex("users")
    .insert({ organisation_id: org.id, email, name: email.split("@")[0], role, status: "active", ...extra })
    .returning(["id", "email"]);
  return row as { id: string; email: string };
}

const reader = { units: "si" as const, timeZone: "UTC" };

function asSessionUser(
  row: { id: string; email: string },
  org: { id: string; name: string },
  role: SessionUser["role"],
): SessionUser {
  return {
    id: row.id,
    email: row.email,
    name: row.email,
    role,
    units: "si",
    timeZone: "UTC",
    timeZoneChosen: false,
    organisation: { ...org, kind: "owner" },
    sessionIdHash: "x",
  };
}

/** The field errors of a write that must be refused as Invalid (400). */
async function fieldErrorsOfRefusal(work: Promise<unknown>): Promise<FieldErrors> {
  const error = await work.then(
    () => undefined,
    (e: unknown) => e,
  );
  expect(error).toBeInstanceOf(Invalid);
  return (error as Invalid).fieldErrors;
}

async function auditOf(ownerId: string, recordType: string, recordId: string) {
  return listAudit(t.knex, ownerId, { recordType, recordId });
}

beforeAll(async () => {
  t = await createTestDatabase();
  [ownerA, ownerB, contractor, strangerContractor] = await t
    .knex("organisations")
    .insert([
      { name: "Owner Alpha", kind: "owner" },
      { name: "Owner Beta", kind: "owner" },
      { name: "Gauge & Coupon, Ltd", kind: "contractor" },
      { name: "Beta's Contractor", kind: "contractor" },
    ])
    .returning(["id", "name"]);
  sitesA = await t
    .knex("sites")
    .insert([
      { owner_id: ownerA.id, name: "Alpha North", code: "AN", time_zone: "UTC" },
      { owner_id: ownerA.id, name: "Alpha South", code: "AS", time_zone: "UTC" },
    ])
    .returning(["id", "code"]);
  [siteB] = await t
    .knex("sites")
    .insert({ owner_id: ownerB.id, name: "Beta Works", code: "BW", time_zone: "UTC" })
    .returning(["id"]);
  adminA = asSessionUser(await person(ownerA, "admin@alpha.example", "administrator"), ownerA, "administrator");
  adminB = asSessionUser(await person(ownerB, "admin@beta.example", "administrator"), ownerB, "administrator");
  engineerA = await person(ownerA, "engineer@alpha.example", "integrity_engineer", { last_sign_in_at: new Date() });
  ({ today, yesterday } = await contractCalendar(t.knex));
  // Owner A has engaged `contractor`; owner B has engaged `strangerContractor`.
  const [ca] = await t
    .knex("contracts")
    .insert({
      owner_id: ownerA.id,
      contractor_id: contractor.id,
      reference: "A-SEED-1",
      scope: ["coupon_monitoring"],
      starts_on: addDays(today, -30),
    })
    .returning(["id"]);
  await t.knex("contract_sites").insert({ contract_id: ca.id, site_id: sitesA[0].id });
  const [cb] = await t
    .knex("contracts")
    .insert({
      owner_id: ownerB.id,
      contractor_id: strangerContractor.id,
      reference: "B-SEED-1",
      scope: ["thickness_inspection"],
      starts_on: addDays(today, -30),
    })
    .returning(["id"]);
  await t.knex("contract_sites").insert({ contract_id: cb.id, site_id: siteB.id });
});

afterAll(async () => {
  await t?.drop();
});

describe("members", () => {
  it("invites own staff and a technician of an engaged contractor, each audited", async () => {
    const staff = await inviteMember(
      t.knex,
      adminA,
      { email: "  New.Manager@Alpha.example ", name: "Nia Manager", role: "plant_manager" },
      "req-1",
    );
    const tech = await inviteMember(t.knex, adminA, {
      email: "tech@gauge.example",
      name: "Tom Tech",
      role: "contractor_technician",
      contractorId: contractor.id,
    });

    const members = await listMembers(t.knex, ownerA.id);
    const nia = members.find((m) => m.id === staff.userId)!;
    expect(nia).toMatchObject({
      email: "new.manager@alpha.example",
      role: "plant_manager",
      status: "invited",
      organisation_id: ownerA.id,
    });
    const tom = members.find((m) => m.id === tech.userId)!;
    expect(tom).toMatchObject({ organisation_id: contractor.id, role: "contractor_technician" });
    // owner B does not see owner A's people
    expect((await listMembers(t.knex, ownerB.id)).map((m) => m.email)).toEqual(["admin@beta.example"]);

    const [event] = await auditOf(ownerA.id, "user", staff.userId);
    expect(event).toMatchObject({ action: "member.invited", actor_label: "admin@alpha.example" });
    expect(event.after).toMatchObject({ email: "new.manager@alpha.example", role: "plant_manager", status: "invited" });
  });

  it("mails the invited person once, in the invitation's transaction: who, where, as what, how to sign in", async () => {
    await t.knex("users").where({ id: adminA.id }).update({ name: "Ada Alpha" });
    const origin = env().APP_ORIGIN;
    const staff = await inviteMember(t.knex, adminA, {
      email: "ina.engineer@alpha.example",
      name: "Ina Engineer",
      role: "integrity_engineer",
    });
    const tech = await inviteMember(t.knex, adminA, {
      email: "Tara+coupons@Gauge.example",
      name: "Tara Tech",
      role: "contractor_technician",
      contractorId: contractor.id,
    });

    const staffMail = await t.knex("email_outbox").where({ to_email: "ina.engineer@alpha.example" }).select("*");
    expect(staffMail).toHaveLength(1);
    expect(staffMail[0]).toMatchObject({
      owner_id: ownerA.id,
      event_key: `member.invited:${staff.userId}:ina.engineer@alpha.example`,
      subject: "Ada Alpha invited you to Owner Alpha in Wallcast",
      sent_at: null,
    });
    expect(staffMail[0].text).toContain("Hello Ina Engineer,");
    expect(staffMail[0].text).toContain("Ada Alpha invited you to Owner Alpha in Wallcast as an integrity engineer.");
    expect(staffMail[0].text).toContain(
      `Sign in to Wallcast: ${origin}/auth/login?login_hint=ina.engineer%40alpha.example`,
    );
    expect(staffMail[0].html).toContain(`href="${origin}/auth/login?login_hint=ina.engineer%40alpha.example"`);

    const techMail = await t.knex("email_outbox").where({ to_email: "tara+coupons@gauge.example" }).select("*");
    expect(techMail).toHaveLength(1);
    expect(techMail[0].owner_id).toBe(ownerA.id);
    expect(techMail[0].event_key).toBe(`member.invited:${tech.userId}:tara+coupons@gauge.example`);
    expect(techMail[0].subject).toBe("Ada Alpha of Owner Alpha invited you to Wallcast for Gauge & Coupon, Ltd");
    expect(techMail[0].text).toContain(
      "Ada Alpha of Owner Alpha invited you to Wallcast as a contractor technician of Gauge & Coupon, Ltd, a contractor Owner Alpha has engaged.",
    );
    expect(techMail[0].html).toContain("Gauge &amp; Coupon, Ltd");
    expect(techMail[0].text).toContain(`${origin}/auth/login?login_hint=tara%2Bcoupons%40gauge.example`);
    // the one who invited hears nothing
    expect(await t.knex("email_outbox").where({ to_email: adminA.email })).toHaveLength(0);
  });

  it("writes neither the person nor the e-mail when the invitation fails", async () => {
    const before = (await t.knex("email_outbox").count<[{ count: string }]>("* as count"))[0].count;
    await expect(
      inviteMember(t.knex, adminA, { email: "ENGINEER@alpha.example", name: "Again", role: "plant_manager" }),
    ).rejects.toBeInstanceOf(Invalid);
    await expect(
      t.knex.transaction(async (trx) => {
        await inviteMember(trx, adminA, { email: "rolled.back@alpha.example", name: "Rolled", role: "plant_manager" });
        expect(await trx("email_outbox").where({ to_email: "rolled.back@alpha.example" })).toHaveLength(1);
        throw new Error("the request fails after the invitation");
      }),
    ).rejects.toThrow(/fails after/);
    expect(await t.knex("users").where({ email: "rolled.back@alpha.example" })).toHaveLength(0);
    expect((await t.knex("email_outbox").count<[{ count: string }]>("* as count"))[0].count).toBe(before);
  });

  it("refuses an address that already belongs to an organisation, naming it", async () => {
    await expect(
      inviteMember(t.knex, adminA, { email: "ENGINEER@alpha.example", name: "Again", role: "plant_manager" }),
    ).rejects.toMatchObject({
      status: 400,
      fieldErrors: { email: expect.stringMatching(/engineer@alpha\.example is already on your list/) },
    });

    const theirs = await fieldErrorsOfRefusal(
      inviteMember(t.knex, adminA, { email: "admin@beta.example", name: "Poach", role: "administrator" }),
    );
    expect(theirs.email).toContain("admin@beta.example");
    expect(theirs.email).toMatch(/another organisation/);
    expect(theirs.email).not.toContain("Owner Beta");
  });

  it("refuses bad input field by field, and technicians of contractors this owner has not engaged", async () => {
    const bad = await fieldErrorsOfRefusal(
      inviteMember(t.knex, adminA, { email: "not-an-address", name: "", role: "superuser" }),
    );
    expect(Object.keys(bad).sort()).toEqual(["email", "name", "role"]);

    await expect(
      inviteMember(t.knex, adminA, {
        email: "spy@beta-contractor.example",
        name: "Spy",
        role: "contractor_technician",
        contractorId: strangerContractor.id,
      }),
    ).rejects.toMatchObject({
      status: 400,
      fieldErrors: { contractorId: expect.stringMatching(/not one of your contractors/) },
    });

    await expect(
      inviteMember(t.knex, adminA, { email: "x@y.example", name: "X", role: "contractor_technician" }),
    ).rejects.toMatchObject({ status: 400, fieldErrors: { contractorId: expect.any(String) } });
    expect(await t.knex("users").whereIn("email", ["spy@beta-contractor.example", "x@y.example"])).toHaveLength(0);
  });

  it("changes a staff member's role with before and after in the trail", async () => {
    const result = await changeMemberRole(t.knex, adminA, { userId: engineerA.id, role: "plant_manager" }, "req-2");
    expect(result).toMatchObject({ changed: true });
    expect((await t.knex("users").where({ id: engineerA.id }).first("role")).role).toBe("plant_manager");
    const [event] = await auditOf(ownerA.id, "user", engineerA.id);
    expect(event.action).toBe("member.role_changed");
    expect(event.before).toMatchObject({ role: "integrity_engineer" });
    expect(event.after).toMatchObject({ role: "plant_manager" });
    expect(auditChanges(event.before, event.after, reader)).toEqual([
      { field: "role", before: "Integrity engineer", after: "Plant manager" },
    ]);

    const again = await changeMemberRole(t.knex, adminA, { userId: engineerA.id, role: "plant_manager" });
    expect(again).toMatchObject({ changed: false });
    await changeMemberRole(t.knex, adminA, { userId: engineerA.id, role: "integrity_engineer" });
  });

  it("refuses self-demotion, the technician role, technicians' roles, and other owners' people", async () => {
    await expect(changeMemberRole(t.knex, adminA, { userId: adminA.id, role: "plant_manager" })).rejects.toMatchObject({
      status: 400,
      fieldErrors: { role: expect.stringMatching(/cannot change your own role/) },
    });
    await expect(
      changeMemberRole(t.knex, adminA, { userId: engineerA.id, role: "contractor_technician" }),
    ).rejects.toMatchObject({ status: 400, fieldErrors: { role: expect.stringMatching(/owner role/) } });
    const tom = (await listMembers(t.knex, ownerA.id)).find((m) => m.email === "tech@gauge.example")!;
    await expect(changeMemberRole(t.knex, adminA, { userId: tom.id, role: "plant_manager" })).rejects.toMatchObject({
      status: 400,
      fieldErrors: { role: expect.stringMatching(/role cannot change/) },
    });
    await expect(changeMemberRole(t.knex, adminA, { userId: adminB.id, role: "plant_manager" })).rejects.toBeInstanceOf(
      NotFoundInTenant,
    );
    await expect(changeMemberRole(t.knex, adminA, { userId: "1 or 1=1", role: "plant_manager" })).rejects.toMatchObject(
      { status: 404 },
    );
    // only an administrator manages people, whatever the caller
    await expect(
      changeMemberRole(
        t.knex,
        { ...adminA, role: "integrity_engineer" },
        { userId: engineerA.id, role: "plant_manager" },
      ),
    ).rejects.toBeInstanceOf(Forbidden);
    expect((await t.knex("users").where({ id: adminA.id }).first("role")).role).toBe("administrator");
    expect((await t.knex("users").where({ id: adminB.id }).first("role")).role).toBe("administrator");
  });

  it("disabling deletes the person's sessions at once; re-enabling restores their previous state", async () => {
    const expires = new Date(Date.now() + 3_600_000);
    await t.knex("sessions").insert([
      { id_hash: "a".repeat(64), user_id: engineerA.id, expires_at: expires },
      { id_hash: "b".repeat(64), user_id: engineerA.id, expires_at: expires },
      { id_hash: "c".repeat(64), user_id: adminA.id, expires_at: expires },
    ]);
    const result = await setMemberAccess(t.knex, adminA, { userId: engineerA.id, access: "disabled" });
    expect(result).toMatchObject({ changed: true, sessionsEnded: 2 });
    expect(await t.knex("sessions").where({ user_id: engineerA.id })).toHaveLength(0);
    expect(await t.knex("sessions").where({ user_id: adminA.id })).toHaveLength(1);
    expect((await t.knex("users").where({ id: engineerA.id }).first("status")).status).toBe("disabled");
    const [event] = await auditOf(ownerA.id, "user", engineerA.id);
    expect(event).toMatchObject({
      action: "member.disabled",
      before: { status: "active" },
      after: { status: "disabled", sessions_ended: 2 },
    });

    const back = await setMemberAccess(t.knex, adminA, { userId: engineerA.id, access: "enabled" });
    expect(back).toMatchObject({ changed: true });
    expect((await t.knex("users").where({ id: engineerA.id }).first("status")).status).toBe("active"); // had signed in before

    const nia = (await listMembers(t.knex, ownerA.id)).find((m) => m.email === "new.manager@alpha.example")!;
    await setMemberAccess(t.knex, adminA, { userId: nia.id, access: "disabled" });
    await setMemberAccess(t.knex, adminA, { userId: nia.id, access: "enabled" });
    expect((await t.knex("users").where({ id: nia.id }).first("status")).status).toBe("invited"); // never signed in
  });

  it("refuses to disable yourself or another owner's people", async () => {
    await expect(setMemberAccess(t.knex, adminA, { userId: adminA.id, access: "disabled" })).rejects.toMatchObject({
      status: 400,
      fieldErrors: { userId: expect.stringMatching(/cannot disable yourself/) },
    });
    await expect(setMemberAccess(t.knex, adminA, { userId: adminB.id, access: "disabled" })).rejects.toMatchObject({
      status: 404,
    });
    await expect(setMemberAccess(t.knex, adminA, { userId: "nope", access: "disabled" })).rejects.toMatchObject({
      status: 404,
    });
    expect((await t.knex("users").where({ id: adminB.id }).first("status")).status).toBe("active");
  });
});

describe("contracts", () => {
  const base = () => ({
    contractorId: contractor.id,
    reference: `A-${Math.random().toString(36).slice(2, 8)}`,
    siteIds: [sitesA[0].id, sitesA[1].id],
    scope: ["coupon_monitoring", "thickness_inspection"],
    startsOn: addDays(today, -10),
    endsOn: "",
  });

  it("creates a contract with an existing contractor, audited, and shows it as active", async () => {
    const input = base();
    const result = await createContract(t.knex, adminA, input, "req-3");
    const contract = (await getContract(t.knex, ownerA.id, result.contractId))!;
    expect(contract).toMatchObject({
      reference: input.reference,
      contractor_name: contractor.name,
      status: "active",
      starts_on: input.startsOn,
      ends_on: null,
      scope: ["coupon_monitoring", "thickness_inspection"],
    });
    expect(contract.sites.map((s) => s.code)).toEqual(["AN", "AS"]);
    const [event] = await auditOf(ownerA.id, "contract", result.contractId);
    expect(event).toMatchObject({ action: "contract.created", before: null });
    expect((await t.knex("audit_events").where({ id: event.id }).first("request_id")).request_id).toBe("req-3");
    expect(event.after).toMatchObject({ reference: input.reference, sites: ["AN", "AS"], ends_on: null });
    // another owner cannot see it
    expect(await getContract(t.knex, ownerB.id, result.contractId)).toBeUndefined();
    expect((await listContracts(t.knex, ownerB.id)).map((c) => c.reference)).toEqual(["B-SEED-1"]);
  });

  it("creates a new contractor company by name, never matching another owner's contractor", async () => {
    const result = await createContract(t.knex, adminA, {
      ...base(),
      contractorId: undefined,
      newContractorName: "Beta's Contractor",
    });
    expect(result.contractorId).not.toBe(strangerContractor.id);
    const org = await t.knex("organisations").where({ id: result.contractorId }).first("name", "kind");
    expect(org).toEqual({ name: "Beta's Contractor", kind: "contractor" });
    await expect(
      createContract(t.knex, adminA, { ...base(), contractorId: undefined, newContractorName: "beta's contractor" }),
    ).rejects.toMatchObject({
      status: 400,
      fieldErrors: { newContractorName: expect.stringMatching(/already one of your contractors/) },
    });
  });

  it("refuses sites of another owner (checked in SQL) and a contractor this owner never engaged", async () => {
    const before = await t.knex("contracts").count<Array<{ n: string }>>({ n: "*" });
    await expect(
      createContract(t.knex, adminA, { ...base(), siteIds: [sitesA[0].id, siteB.id] }),
    ).rejects.toMatchObject({
      status: 400,
      fieldErrors: { siteIds: expect.stringMatching(/not one of your organisation’s sites/) },
    });
    await expect(
      createContract(t.knex, adminA, { ...base(), siteIds: ["00000000-0000-4000-8000-000000000000"] }),
    ).rejects.toBeInstanceOf(Invalid);
    await expect(
      createContract(t.knex, adminA, { ...base(), contractorId: strangerContractor.id }),
    ).rejects.toMatchObject({ status: 400, fieldErrors: { contractorId: expect.any(String) } });
    // a new company refused for its sites is not added either: nothing is written when any step fails
    const companies = await t.knex("organisations").count<Array<{ n: string }>>({ n: "*" });
    await expect(
      createContract(t.knex, adminA, {
        ...base(),
        contractorId: undefined,
        newContractorName: "Never Added Ltd",
        siteIds: [siteB.id],
      }),
    ).rejects.toBeInstanceOf(Invalid);
    expect((await t.knex("organisations").count<Array<{ n: string }>>({ n: "*" }))[0].n).toBe(companies[0].n);
    const after = await t.knex("contracts").count<Array<{ n: string }>>({ n: "*" });
    expect(after[0].n).toBe(before[0].n);
  });

  it("validates every field in words", async () => {
    const cases: Array<[Record<string, unknown>, string, RegExp]> = [
      [{ reference: "  " }, "reference", /reference/],
      [{ startsOn: "2026-02-30" }, "startsOn", /real calendar date/],
      [{ startsOn: "01/03/2026" }, "startsOn", /YYYY-MM-DD/],
      [{ startsOn: "2026-03-10", endsOn: "2026-03-09" }, "endsOn", /cannot be before the first day/],
      [{ scope: [] }, "scope", /at least one kind of work/],
      [{ scope: ["painting"] }, "scope", /coupon monitoring, thickness inspection/],
      [{ siteIds: [] }, "siteIds", /at least one site/],
      [{ siteIds: ["x"] }, "siteIds", /from the list/],
      [{ contractorId: undefined }, "contractorId", /Choose the contractor/],
      [{ contractorId: undefined, newContractorName: " " }, "newContractorName", /name/],
    ];
    for (const [change, field, message] of cases) {
      const errors = await fieldErrorsOfRefusal(createContract(t.knex, adminA, { ...base(), ...change }));
      expect(errors[field], JSON.stringify(change)).toMatch(message);
    }
    await expect(createContract(t.knex, adminA, { ...base(), reference: "A-SEED-1" })).rejects.toMatchObject({
      status: 400,
      fieldErrors: { reference: expect.stringMatching(/already have a contract with the reference A-SEED-1/) },
    });
  });

  it("computes active, upcoming and ended from the dates against today", async () => {
    const upcoming = await createContract(t.knex, adminA, { ...base(), startsOn: addDays(today, 5) });
    const endedYesterday = await createContract(t.knex, adminA, {
      ...base(),
      startsOn: addDays(today, -100),
      endsOn: yesterday,
    });
    const lastDayToday = await createContract(t.knex, adminA, {
      ...base(),
      startsOn: addDays(today, -100),
      endsOn: today,
    });
    const byId = new Map((await listContracts(t.knex, ownerA.id)).map((c) => [c.id, c.status]));
    expect(byId.get(upcoming.contractId)).toBe("upcoming");
    expect(byId.get(endedYesterday.contractId)).toBe("ended");
    expect(byId.get(lastDayToday.contractId)).toBe("active");
  });

  it("ends a contract on a chosen day with the reason in the trail, and refuses impossible ends", async () => {
    const created = await createContract(t.knex, adminA, {
      ...base(),
      startsOn: addDays(today, -40),
      endsOn: addDays(today, 200),
    });
    const id = created.contractId;

    await expect(endContract(t.knex, adminA, id, { endsOn: addDays(today, -41) })).rejects.toMatchObject({
      status: 400,
      fieldErrors: { endsOn: expect.stringMatching(/cannot be before/) },
    });
    await expect(endContract(t.knex, adminA, id, { endsOn: addDays(today, 300) })).rejects.toMatchObject({
      status: 400,
      fieldErrors: { endsOn: expect.stringMatching(/already ends on/) },
    });
    await expect(endContract(t.knex, adminA, id, { endsOn: "yesterday" })).rejects.toMatchObject({ status: 400 });

    const ended = await endContract(t.knex, adminA, id, { endsOn: yesterday, reason: "Scope moved in-house" });
    expect(ended).toEqual({ endsOn: yesterday });
    expect((await getContract(t.knex, ownerA.id, id))!.status).toBe("ended");
    const [event] = await auditOf(ownerA.id, "contract", id);
    expect(event).toMatchObject({ action: "contract.ended", reason: "Scope moved in-house" });
    expect(event.before).toMatchObject({ ends_on: addDays(today, 200) });
    expect(event.after).toMatchObject({ ends_on: yesterday });
  });

  it("edits sites, scope and dates in one audited change; another owner's admin gets 404", async () => {
    const created = await createContract(t.knex, adminA, base());
    const id = created.contractId;
    const edit = {
      siteIds: [sitesA[1].id],
      scope: ["thickness_inspection"],
      startsOn: addDays(today, -10),
      endsOn: addDays(today, 90),
    };

    await expect(updateContract(t.knex, adminB, id, edit)).rejects.toBeInstanceOf(NotFoundInTenant);
    await expect(endContract(t.knex, adminB, id, { endsOn: yesterday })).rejects.toMatchObject({ status: 404 });
    await expect(updateContract(t.knex, adminA, id, { ...edit, siteIds: [siteB.id] })).rejects.toMatchObject({
      status: 400,
      fieldErrors: { siteIds: expect.any(String) },
    });
    await expect(updateContract(t.knex, adminA, "not-a-uuid", edit)).rejects.toMatchObject({ status: 404 });
    // an engineer reads contracts but does not change them
    await expect(updateContract(t.knex, { ...adminA, role: "integrity_engineer" }, id, edit)).rejects.toMatchObject({
      status: 403,
    });

    expect(await updateContract(t.knex, adminA, id, edit)).toEqual({ changed: true });
    const contract = (await getContract(t.knex, ownerA.id, id))!;
    expect(contract.sites.map((s) => s.code)).toEqual(["AS"]);
    expect(contract).toMatchObject({ scope: ["thickness_inspection"], ends_on: addDays(today, 90) });
    const [event] = await auditOf(ownerA.id, "contract", id);
    expect(event.action).toBe("contract.updated");
    expect(
      auditChanges(event.before, event.after, reader)
        .map((c) => c.field)
        .sort(),
    ).toEqual(["ends on", "scope", "sites"]);
    expect(await updateContract(t.knex, adminA, id, edit)).toEqual({ changed: false });
  });
});

describe("API clients", () => {
  it("shows the token once and stores only its sha256 and first 12 characters", async () => {
    const created = await createApiClient(t.knex, adminA, {
      name: "Alpha LIMS",
      scopes: ["results:read", "lims:write"],
    });
    expect(created.token).toMatch(/^wct_[A-Za-z0-9_-]{43}$/);
    expect(Buffer.from(created.token.slice(4), "base64url")).toHaveLength(32);

    const row = await t.knex("api_clients").where({ id: created.clientId }).first();
    expect(row.token_hash).toBe(createHash("sha256").update(created.token).digest("hex"));
    expect(row.token_hint).toBe(created.token.slice(0, 12));
    expect(row.scopes).toEqual(["lims:write", "results:read"]);
    expect(JSON.stringify(row)).not.toContain(created.token);
    const [event] = await auditOf(ownerA.id, "api_client", created.clientId);
    expect(event.action).toBe("api_client.created");
    expect(JSON.stringify([event.before, event.after])).not.toContain(created.token);

    const listed = await listApiClients(t.knex, ownerA.id);
    expect(listed.find((c) => c.id === created.clientId)).toMatchObject({
      name: "Alpha LIMS",
      token_hint: created.tokenHint,
      last_used_at: null,
    });
    expect(JSON.stringify(listed)).not.toContain(created.token);
    expect(await listApiClients(t.knex, ownerB.id)).toHaveLength(0);
  });

  it("gives a client an expiry at the end of its last day (UTC) and its own rate limit, or refuses them by field", async () => {
    const created = await createApiClient(t.knex, adminA, {
      name: "Short-lived LIMS",
      scopes: ["lims:write"],
      expiresOn: today,
      requestsPerMinute: "600",
    });
    const row = await t.knex("api_clients").where({ id: created.clientId }).first("expires_at", "requests_per_minute");
    expect(row.expires_at.toISOString()).toBe(`${addDays(today, 1)}T00:00:00.000Z`);
    expect(row.requests_per_minute).toBe(600);
    expect(await lookUpApiToken(t.knex, created.token)).toHaveProperty("client.requests_per_minute", 600);
    await t
      .knex("api_clients")
      .where({ id: created.clientId })
      .update({ expires_at: new Date(Date.now() - 1000) });
    expect(await lookUpApiToken(t.knex, created.token)).toEqual({ refused: "expired" });

    const refused = await createApiClient(t.knex, adminA, {
      name: "Bad",
      scopes: ["lims:write"],
      expiresOn: yesterday,
      requestsPerMinute: "0",
    }).catch((e: unknown) => e);
    expect(refused).toBeInstanceOf(Invalid);
    expect((refused as Invalid).fieldErrors).toEqual({
      expiresOn: "The last day cannot be in the past (UTC).",
      requestsPerMinute: "The request limit must be a whole number from 1 to 100000 requests a minute.",
    });
  });

  it("finds a client by its token and records the use, until it is revoked", async () => {
    const created = await createApiClient(t.knex, adminA, { name: "Outlook feed", scopes: ["outlook:read"] });
    const found = await lookUpApiToken(t.knex, created.token);
    expect(found).toEqual({
      client: {
        id: created.clientId,
        owner_id: ownerA.id,
        owner_name: ownerA.name,
        name: "Outlook feed",
        scopes: ["outlook:read"],
        requests_per_minute: null,
      },
    });
    expect(
      (await t.knex("api_clients").where({ id: created.clientId }).first("last_used_at")).last_used_at,
    ).toBeInstanceOf(Date);

    expect(
      await lookUpApiToken(t.knex, created.token.slice(0, -1) + (created.token.endsWith("A") ? "B" : "A")),
    ).toEqual({ refused: "unknown" });
    expect(await lookUpApiToken(t.knex, "Bearer nonsense")).toEqual({ refused: "unknown" });

    await expect(revokeApiClient(t.knex, adminB, created.clientId)).rejects.toBeInstanceOf(NotFoundInTenant);
    expect(await lookUpApiToken(t.knex, created.token)).toHaveProperty("client");

    expect(await revokeApiClient(t.knex, adminA, created.clientId)).toEqual({ changed: true, name: "Outlook feed" });
    expect(await lookUpApiToken(t.knex, created.token)).toEqual({ refused: "revoked" });
    const row = await t.knex("api_clients").where({ id: created.clientId }).first("revoked_at", "revoked_by");
    expect(row.revoked_by).toBe(adminA.id);
    expect(row.revoked_at).toBeInstanceOf(Date);
    expect(await revokeApiClient(t.knex, adminA, created.clientId)).toEqual({ changed: false, name: "Outlook feed" });
    const [event] = await auditOf(ownerA.id, "api_client", created.clientId);
    expect(event.action).toBe("api_client.revoked");
  });

  it("refuses a client without a name or permissions", async () => {
    const bad = await fieldErrorsOfRefusal(createApiClient(t.knex, adminA, { name: " ", scopes: [] }));
    expect(Object.keys(bad).sort()).toEqual(["name", "scopes"]);
    await expect(createApiClient(t.knex, adminA, { name: "X", scopes: ["admin:all"] })).rejects.toMatchObject({
      status: 400,
      fieldErrors: { scopes: expect.stringMatching(/lims:write/) },
    });
    await expect(
      createApiClient(t.knex, { ...adminA, role: "plant_manager" }, { name: "X", scopes: ["results:read"] }),
    ).rejects.toBeInstanceOf(Forbidden);
  });
});

describe("audit trail", () => {
  it("exports CSV with a header row and quoting of commas, quotes and line breaks", async () => {
    const tricky = 'Moved, "per" MOC\nline two';
    await recordAudit(t.knex, {
      ownerId: ownerA.id,
      actor: { userId: adminA.id, organisationId: ownerA.id, label: "=cmd|' /C calc'!A0" },
      action: "note.added",
      recordType: "note",
      recordId: "n-1",
      before: { text: "a,b" },
      after: { text: 'say "hi"' },
      reason: tricky,
    });
    const rows = await listAudit(t.knex, ownerA.id, { recordType: "note", recordId: "n-1" });
    const csv = auditToCsv(rows);
    expect(csv.split("\r\n")[0]).toBe("id,created_at,actor,action,record_type,record_id,reason,before,after,hash");
    const parsed: string[][] = parse(csv, { relax_column_count: false });
    expect(parsed[0]).toEqual(auditCsvHeader);
    expect(parsed).toHaveLength(2);
    const [id, createdAt, actor, action, recordType, recordId, reason, before, after, hash] = parsed[1];
    expect(id).toBe(rows[0].id);
    expect(createdAt).toMatch(/^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}\.\d{3}Z$/);
    expect(actor).toBe("'=cmd|' /C calc'!A0"); // a spreadsheet will not run it as a formula
    expect([action, recordType, recordId, reason]).toEqual(["note.added", "note", "n-1", tricky]);
    expect(JSON.parse(before)).toEqual({ text: "a,b" });
    expect(JSON.parse(after)).toEqual({ text: 'say "hi"' });
    expect(hash).toMatch(/^[0-9a-f]{64}$/);
  });

  it("keeps each owner's chain intact through all of the above", async () => {
    const [a] = await verifyAuditChain(t.knex, ownerA.id);
    expect(a.events).toBeGreaterThan(10);
    expect(a.broken).toEqual([]);
    expect(await listAudit(t.knex, ownerB.id, {})).toHaveLength(0);
  });
});
