import type { Knex } from "knex";
import type { Role, SessionUser } from "../../app/context";

/**
 * A small world for integration tests (never the demo seed): two owners, a monitoring
 * contractor with a live coupon-monitoring contract at the first owner's site, an
 * inspection contractor with a thickness-only contract, and a contractor whose contract
 * ended two days ago by UTC (so before today at every site, whatever its zone).
 */
export type World = Awaited<ReturnType<typeof buildWorld>>;

const today = () => new Date().toISOString().slice(0, 10);
const shift = (days: number) => new Date(Date.now() + days * 86_400_000).toISOString().slice(0, 10);

export async function buildWorld(knex: Knex) {
  const [owner, owner2, monitoring, inspection, lapsed] = await knex("organisations")
    .insert([
      { name: "Owner One", kind: "owner" },
      { name: "Owner Two", kind: "owner" },
      { name: "Monitoring Co", kind: "contractor" },
      { name: "Inspection Co", kind: "contractor" },
      { name: "Lapsed Co", kind: "contractor" },
    ])
    .returning(["id", "name", "kind"]);
  const [site, site2, foreignSite] = await knex("sites")
    .insert([
      { owner_id: owner.id, name: "Plant A", code: "PA", time_zone: "America/Chicago" },
      { owner_id: owner.id, name: "Plant B", code: "PB", time_zone: "UTC" },
      { owner_id: owner2.id, name: "Plant Z", code: "PZ", time_zone: "Europe/London" },
    ])
    .returning(["id", "code", "time_zone"]);

  const person = async (
    email: string,
    org: { id: string; name: string; kind: string },
    role: Role,
  ): Promise<SessionUser> => {
    const [u] = await knex("users")
      .insert({ email, name: email.split("@")[0], role, status: "active", organisation_id: org.id })
      .returning("id");
    return {
      id: u.id,
      email,
      name: email.split("@")[0],
      role,
      units: "si",
      timeZone: "UTC",
      timeZoneChosen: false,
      organisation: { id: org.id, name: org.name, kind: org.kind as "owner" | "contractor" },
      sessionIdHash: "test",
    };
  };
  const users = {
    admin: await person("admin@one.test", owner, "administrator"),
    engineer: await person("engineer@one.test", owner, "integrity_engineer"),
    manager: await person("manager@one.test", owner, "plant_manager"),
    engineer2: await person("engineer@two.test", owner2, "integrity_engineer"),
    tech: await person("tech@monitoring.test", monitoring, "contractor_technician"),
    inspector: await person("tech@inspection.test", inspection, "contractor_technician"),
    lapsedTech: await person("tech@lapsed.test", lapsed, "contractor_technician"),
  };

  const contract = async (
    contractorId: string,
    scope: string[],
    sites: string[],
    starts: string,
    ends: string | null,
  ) => {
    const [c] = await knex("contracts")
      .insert({
        owner_id: owner.id,
        contractor_id: contractorId,
        reference: `C-${contractorId.slice(0, 8)}-${scope[0]}`,
        scope,
        starts_on: starts,
        ends_on: ends,
      })
      .returning("id");
    await knex("contract_sites").insert(sites.map((s) => ({ contract_id: c.id, site_id: s })));
    return c.id as string;
  };
  await contract(monitoring.id, ["coupon_monitoring"], [site.id], shift(-400), null);
  await contract(inspection.id, ["thickness_inspection"], [site.id], shift(-400), null);
  await contract(lapsed.id, ["coupon_monitoring"], [site.id], shift(-400), shift(-2));

  const [unit] = await knex("process_units")
    .insert({ site_id: site.id, tag: "U-1", description: "Unit one" })
    .returning("id");
  const [circuit] = await knex("circuits")
    .insert({ unit_id: unit.id, site_id: site.id, tag: "C-1", material_code: "carbon-steel", service: "sour water" })
    .returning("id");
  const [point, point2] = await knex("monitoring_points")
    .insert([
      // strips stand in the flow: both points are intrusive (services/coupon-fit.ts)
      {
        owner_id: owner.id,
        site_id: site.id,
        circuit_id: circuit.id,
        tag: "CP-1",
        planned_exposure_days: 90,
        mounting: "intrusive",
      },
      {
        owner_id: owner.id,
        site_id: site.id,
        circuit_id: circuit.id,
        tag: "CP-2",
        planned_exposure_days: 60,
        mounting: "intrusive",
      },
    ])
    .returning("id");
  const coupon = async (serial: string, ownerId = owner.id) => {
    const [c] = await knex("coupons")
      .insert({
        owner_id: ownerId,
        serial,
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
    return c.id as string;
  };
  return {
    owner,
    owner2,
    monitoring,
    inspection,
    lapsed,
    site,
    site2,
    foreignSite,
    users,
    point: point.id as string,
    point2: point2.id as string,
    coupon,
    today: today(),
    shift,
  };
}

// ----------------------------------------------------------------------------------------
// Building blocks for a test's own small world (the browser tests compose theirs from
// these). Every name, tag and serial is chosen by the caller; nothing comes from the seed.

export type OrganisationRow = { id: string; name: string; kind: "owner" | "contractor" };
export type SiteRow = { id: string; name: string; code: string; timeZone: string };
export type UserRow = { id: string; email: string; name: string; role: Role; organisationId: string };
export type ScopeOfWorkName = "coupon_monitoring" | "thickness_inspection";

/** An ISO instant `days` before now (negative: in the future), at `hourUtc` o'clock UTC. */
export function daysAgoAt(days: number, hourUtc = 9): string {
  const t = new Date(Date.now() - days * 86_400_000);
  t.setUTCHours(hourUtc, 0, 0, 0);
  return t.toISOString();
}

/** An ISO date `days` from today (negative: in the past). */
export function dateFromToday(days: number): string {
  return new Date(Date.now() + days * 86_400_000).toISOString().slice(0, 10);
}

export async function createOrganisation(
  knex: Knex,
  name: string,
  kind: "owner" | "contractor",
): Promise<OrganisationRow> {
  const [o] = await knex("organisations").insert({ name, kind }).returning(["id", "name", "kind"]);
  return { id: o.id, name: o.name, kind: o.kind };
}

export async function createSite(
  knex: Knex,
  owner: OrganisationRow,
  site: { name: string; code: string; timeZone: string },
): Promise<SiteRow> {
  const [s] = await knex("sites")
    .insert({ owner_id: owner.id, name: site.name, code: site.code, time_zone: site.timeZone })
    .returning(["id", "name", "code", "time_zone"]);
  return { id: s.id, name: s.name, code: s.code, timeZone: s.time_zone };
}

/** An active member of the organisation (contractor staff: invited by `invitedBy`). */
export async function createUser(
  knex: Knex,
  organisation: OrganisationRow,
  person: {
    email: string;
    name: string;
    role: Role;
    invitedBy?: OrganisationRow;
    status?: "active" | "invited" | "disabled";
  },
): Promise<UserRow> {
  const [u] = await knex("users")
    .insert({
      email: person.email,
      name: person.name,
      role: person.role,
      status: person.status ?? "active",
      organisation_id: organisation.id,
      invited_by_organisation_id: person.invitedBy?.id ?? null,
    })
    .returning(["id", "email", "name", "role"]);
  return { id: u.id, email: u.email, name: u.name, role: u.role, organisationId: organisation.id };
}

/** A contract between an owner and a contractor covering `sites`; `endsOn` null = open-ended. */
export async function createContract(
  knex: Knex,
  contract: {
    owner: OrganisationRow;
    contractor: OrganisationRow;
    reference: string;
    scope: ScopeOfWorkName[];
    sites: SiteRow[];
    startsOn: string;
    endsOn: string | null;
  },
): Promise<string> {
  const [c] = await knex("contracts")
    .insert({
      owner_id: contract.owner.id,
      contractor_id: contract.contractor.id,
      reference: contract.reference,
      scope: contract.scope,
      starts_on: contract.startsOn,
      ends_on: contract.endsOn,
    })
    .returning("id");
  await knex("contract_sites").insert(contract.sites.map((s) => ({ contract_id: c.id, site_id: s.id })));
  return c.id as string;
}

/** A process unit with one carbon-steel circuit at the site; returns the circuit id. */
export async function createCircuit(
  knex: Knex,
  site: SiteRow,
  circuit: { unitTag: string; circuitTag: string; service?: string },
): Promise<string> {
  const [unit] = await knex("process_units")
    .insert({ site_id: site.id, tag: circuit.unitTag, description: `Unit ${circuit.unitTag}` })
    .returning("id");
  const [c] = await knex("circuits")
    .insert({
      unit_id: unit.id,
      site_id: site.id,
      tag: circuit.circuitTag,
      material_code: "carbon-steel",
      service: circuit.service ?? "",
    })
    .returning("id");
  return c.id as string;
}

/** A coupon position on a circuit. */
export async function createCouponPoint(
  knex: Knex,
  owner: OrganisationRow,
  site: SiteRow,
  circuitId: string,
  point: {
    tag: string;
    plannedExposureDays: number;
    mounting?: "flush" | "intrusive";
    accessFitting?: string;
    orientation?: string;
  },
): Promise<string> {
  const [p] = await knex("monitoring_points")
    .insert({
      owner_id: owner.id,
      site_id: site.id,
      circuit_id: circuitId,
      tag: point.tag,
      planned_exposure_days: point.plannedExposureDays,
      mounting: point.mounting ?? "intrusive",
      access_fitting: point.accessFitting ?? "",
      orientation: point.orientation ?? "",
    })
    .returning("id");
  return p.id as string;
}

/**
 * A carbon-steel strip coupon in the owner's stock: 76.2 × 19.05 × 3.18 mm with a
 * 7.94 mm hole (invented test dimensions), weighed to 0.1 mg.
 */
export async function createStripCoupon(
  knex: Knex,
  owner: OrganisationRow,
  serial: string,
  initialMassG = 36.1234,
): Promise<string> {
  const [c] = await knex("coupons")
    .insert({
      owner_id: owner.id,
      serial,
      material_code: "carbon-steel",
      density_g_cm3: 7.86,
      density_source: "ASTM G1 appendix (from memory)",
      shape: "strip",
      length_mm: 76.2,
      width_mm: 19.05,
      thickness_mm: 3.18,
      hole_diameter_mm: 7.94,
      initial_mass_g: initialMassG,
      balance_resolution_g: 0.0001,
    })
    .returning("id");
  return c.id as string;
}

/** Puts a stock coupon in service at a point, installed by a contractor's technician. */
export async function installCoupon(
  knex: Knex,
  exposure: { owner: OrganisationRow; pointId: string; couponId: string; installedAt: string; by: UserRow },
): Promise<string> {
  const [e] = await knex("coupon_exposures")
    .insert({
      owner_id: exposure.owner.id,
      point_id: exposure.pointId,
      coupon_id: exposure.couponId,
      installed_at: exposure.installedAt,
      installed_by: exposure.by.id,
      installed_by_organisation_id: exposure.by.organisationId,
    })
    .returning("id");
  return e.id as string;
}
