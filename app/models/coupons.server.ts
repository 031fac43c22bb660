import { couponArea, type CouponGeometry } from "../domain/index.ts";
import { geometryOf, parseCoupon, type CouponRecord, type CouponShape } from "../services/coupon-spec";
import type { Db } from "../services/db.server";
import type { FormInput } from "../services/form-fields";
import { Invalid } from "../services/outcome";
import { auditedWrite, type Actor } from "./audit.server";

/** The owner's coupon stock: list, counts by state, and adding a coupon. */

export function couponRow(ownerId: string, c: CouponRecord) {
  const g = c.geometry as CouponGeometry & Record<string, number | undefined>;
  return {
    owner_id: ownerId,
    serial: c.serial,
    material_code: c.materialCode,
    density_g_cm3: c.densityGcm3,
    density_source: c.densitySource,
    shape: g.shape,
    length_mm: g.lengthMm ?? null,
    width_mm: g.widthMm ?? null,
    thickness_mm: g.thicknessMm ?? null,
    diameter_mm: g.diameterMm ?? null,
    hole_diameter_mm: g.holeDiameterMm ?? 0,
    exposed_ends: g.shape === "rod" ? g.exposedEnds : null,
    initial_mass_g: c.initialMassG,
    balance_resolution_g: c.balanceResolutionG,
    lot: c.lot,
    certificate: c.certificate,
  };
}
export const couponAuditSnapshot = (row: ReturnType<typeof couponRow>) => {
  const { owner_id: _owner, ...rest } = row;
  return rest;
};

export type CouponStatus = "in_stock" | "in_service" | "removed";

export type CouponListRow = {
  id: string;
  serial: string;
  material_code: string;
  density_g_cm3: number;
  density_source: string;
  shape: CouponShape;
  length_mm: number | null;
  width_mm: number | null;
  thickness_mm: number | null;
  diameter_mm: number | null;
  hole_diameter_mm: number;
  exposed_ends: number | null;
  /** Exposed area from the geometry, cm² (null only if a stored geometry is no longer valid). */
  area_cm2: number | null;
  initial_mass_g: number;
  balance_resolution_g: number;
  lot: string;
  certificate: string;
  status: CouponStatus;
  point_tag: string | null;
  site_code: string | null;
  installed_at: Date | null;
  removed_at: Date | null;
  created_at: Date;
};

/** A coupon row as PostgreSQL returns it: NUMERIC columns arrive as strings. */
type CouponDbRow = Omit<
  CouponListRow,
  | "density_g_cm3"
  | "length_mm"
  | "width_mm"
  | "thickness_mm"
  | "diameter_mm"
  | "hole_diameter_mm"
  | "initial_mass_g"
  | "balance_resolution_g"
  | "area_cm2"
> & {
  density_g_cm3: string;
  length_mm: string | null;
  width_mm: string | null;
  thickness_mm: string | null;
  diameter_mm: string | null;
  hole_diameter_mm: string;
  initial_mass_g: string;
  balance_resolution_g: string;
};

const numOrNull = (v: unknown) => (v === null || v === undefined ? null : Number(v));

/** Which coupons a list shows: "current" = in stock or in service; "" = every state. */
export type CouponStateFilter = "current" | "" | CouponStatus;
export const couponStateFilters: readonly CouponStateFilter[] = ["current", "", "in_stock", "in_service", "removed"];

const couponStatusSql =
  "case when e.id is null then 'in_stock' when e.removed_at is null then 'in_service' else 'removed' end";

/** The owner's coupons with their state, derived from their exposure (a coupon is exposed once). */
function couponsQuery(conn: Db, ownerId: string, filter: { state?: CouponStateFilter; search?: string }) {
  const q = conn("coupons as k")
    .leftJoin("coupon_exposures as e", (j) => j.on("e.coupon_id", "k.id").andOn("e.owner_id", "k.owner_id"))
    .leftJoin("monitoring_points as p", "p.id", "e.point_id")
    .leftJoin("sites as s", "s.id", "p.site_id")
    .where("k.owner_id", ownerId);
  if (filter.state === "current") q.whereRaw(`${couponStatusSql} <> 'removed'`);
  else if (filter.state) q.whereRaw(`${couponStatusSql} = ?`, [filter.state]);
  const words = filter.search?.trim();
  if (words) {
    const like = `%${words.replace(/[\\%_]/g, (c) => `\\${c}`)}%`;
    q.where((w) =>
      w
        .whereILike("k.serial", like)
        .orWhereILike("k.lot", like)
        .orWhereILike("k.certificate", like)
        .orWhereILike("k.material_code", like)
        .orWhereILike("p.tag", like),
    );
  }
  return q;
}

const couponColumns = (conn: Db) => [
  "k.id",
  "k.serial",
  "k.material_code",
  "k.density_g_cm3",
  "k.density_source",
  "k.shape",
  "k.length_mm",
  "k.width_mm",
  "k.thickness_mm",
  "k.diameter_mm",
  "k.hole_diameter_mm",
  "k.exposed_ends",
  "k.initial_mass_g",
  "k.balance_resolution_g",
  "k.lot",
  "k.certificate",
  "k.created_at",
  "e.installed_at",
  "e.removed_at",
  "p.tag as point_tag",
  "s.code as site_code",
  conn.raw(`${couponStatusSql} as status`),
];

function toCouponListRow(r: CouponDbRow): CouponListRow {
  let area: number | null = null;
  try {
    area = couponArea(geometryOf(r));
  } catch {
    area = null;
  }
  return {
    ...r,
    density_g_cm3: Number(r.density_g_cm3),
    length_mm: numOrNull(r.length_mm),
    width_mm: numOrNull(r.width_mm),
    thickness_mm: numOrNull(r.thickness_mm),
    diameter_mm: numOrNull(r.diameter_mm),
    hole_diameter_mm: Number(r.hole_diameter_mm),
    initial_mass_g: Number(r.initial_mass_g),
    balance_resolution_g: Number(r.balance_resolution_g),
    area_cm2: area,
  };
}

/** Every coupon of the owner, by serial (exports and tests; screens page through `couponsPage`). */
export async function listCoupons(conn: Db, ownerId: string): Promise<CouponListRow[]> {
  const rows: CouponDbRow[] = await couponsQuery(conn, ownerId, {}).orderBy("k.serial").select(couponColumns(conn));
  return rows.map(toCouponListRow);
}

/** One page of the owner's coupons in a state, by serial, with the count of all that match. */
export async function couponsPage(
  conn: Db,
  ownerId: string,
  filter: { state: CouponStateFilter; search?: string },
  page: { number: number; size: number },
): Promise<{ items: CouponListRow[]; total: number; number: number; size: number }> {
  const counted = await couponsQuery(conn, ownerId, filter).count<{ n: string }[]>({ n: "*" }).first();
  const total = Number(counted?.n ?? 0);
  const last = Math.max(1, Math.ceil(total / page.size));
  const number = Math.min(Math.max(1, Math.floor(page.number) || 1), last);
  const rows: CouponDbRow[] = await couponsQuery(conn, ownerId, filter)
    .orderBy(["k.serial", "k.id"])
    .limit(page.size)
    .offset((number - 1) * page.size)
    .select(couponColumns(conn));
  return { items: rows.map(toCouponListRow), total, number, size: page.size };
}

/** Counts of the owner's coupons by state. */
export async function couponStock(conn: Db, ownerId: string): Promise<Record<CouponStatus, number>> {
  const result = await conn.raw<{ rows: Array<Record<CouponStatus, number>> }>(
    `select count(*) filter (where e.id is null)::int as in_stock,
            count(*) filter (where e.id is not null and e.removed_at is null)::int as in_service,
            count(*) filter (where e.removed_at is not null)::int as removed
       from coupons k left join coupon_exposures e on e.coupon_id = k.id and e.owner_id = k.owner_id
      where k.owner_id = ?`,
    [ownerId],
  );
  return result.rows[0];
}

export const serialTaken = (serial: string) =>
  `The serial ${serial} is already in your coupon stock; serials are unique.`;

/** Adds one coupon to the owner's stock. */
export async function createCoupon(
  conn: Db,
  ownerId: string,
  actor: Actor,
  input: FormInput,
  requestId?: string | null,
): Promise<{ id: string; serial: string; areaCm2: number }> {
  const parsed = parseCoupon(input);
  if (!parsed.ok) throw new Invalid(Object.fromEntries(parsed.issues.map((i) => [i.field, i.message])));
  const c = parsed.value;
  const row = couponRow(ownerId, c);
  return auditedWrite(
    conn,
    { ownerId, actor, requestId },
    async ({ trx, record }) => {
      const [coupon]: Array<{ id: string }> = await trx("coupons").insert(row).returning(["id"]);
      await record({
        action: "coupon.created",
        recordType: "coupon",
        recordId: coupon.id,
        after: couponAuditSnapshot(row),
      });
      return { id: coupon.id, serial: c.serial, areaCm2: c.areaCm2 };
    },
    { coupons_owner_serial_key: { serial: serialTaken(c.serial) } },
  );
}
