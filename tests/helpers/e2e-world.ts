import type { Knex } from "knex";
import {
  createCircuit,
  createContract,
  createCouponPoint,
  createOrganisation,
  createSite,
  createStripCoupon,
  createUser,
  dateFromToday,
  daysAgoAt,
  installCoupon,
  type OrganisationRow,
  type SiteRow,
  type UserRow,
} from "./fixtures";

/**
 * A browser test's coupon-monitoring world: one owner with one plant and its integrity
 * engineer, a monitoring contractor with a live contract there and its technician, one
 * coupon position whose coupon has been in service longer than planned (so the pull is
 * overdue) and coupons in stock for the next exchange. Invented names; `mailDomain`
 * keeps each file's people apart in the shared fake mailbox.
 */
export type CouponWorld = {
  owner: OrganisationRow;
  contractor: OrganisationRow;
  site: SiteRow;
  engineer: UserRow;
  tech: UserRow;
  pointTag: string;
  pointId: string;
  stockSerials: string[];
};

export async function buildCouponWorld(
  knex: Knex,
  options: {
    mailDomain: string;
    site: { name: string; code: string; timeZone: string };
    pointTag: string;
    plannedExposureDays: number;
    /** how long the coupon now at the point has been in: more than planned = overdue */
    inServiceDays: number;
  },
): Promise<CouponWorld> {
  const owner = await createOrganisation(knex, "Eskerfield Chemicals", "owner");
  const contractor = await createOrganisation(knex, "Larkmoor Corrosion Monitoring", "contractor");
  const site = await createSite(knex, owner, options.site);
  const engineer = await createUser(knex, owner, {
    email: `engineer@${options.mailDomain}`,
    name: "Petra Holmsund",
    role: "integrity_engineer",
  });
  const tech = await createUser(knex, contractor, {
    email: `tech@${options.mailDomain}`,
    name: "Ansel Variková",
    role: "contractor_technician",
    invitedBy: owner,
  });
  await createContract(knex, {
    owner,
    contractor,
    reference: `${options.site.code}-CM-001`,
    scope: ["coupon_monitoring"],
    sites: [site],
    startsOn: dateFromToday(-400),
    endsOn: null,
  });
  const circuitId = await createCircuit(knex, site, { unitTag: "U-10", circuitTag: "OVHD-01", service: "sour water" });
  const pointId = await createCouponPoint(knex, owner, site, circuitId, {
    tag: options.pointTag,
    plannedExposureDays: options.plannedExposureDays,
    mounting: "intrusive",
    accessFitting: "2-in access fitting AF-1",
    orientation: "bottom of line, 6 o'clock",
  });
  const inService = await createStripCoupon(knex, owner, `${options.site.code}-S-1000`, 36.1234);
  await installCoupon(knex, {
    owner,
    pointId,
    couponId: inService,
    installedAt: daysAgoAt(options.inServiceDays),
    by: tech,
  });
  const stockSerials = [`${options.site.code}-S-1001`, `${options.site.code}-S-1002`];
  for (const [i, serial] of stockSerials.entries()) await createStripCoupon(knex, owner, serial, 36.2011 + i * 0.0137);
  return { owner, contractor, site, engineer, tech, pointTag: options.pointTag, pointId, stockSerials };
}
