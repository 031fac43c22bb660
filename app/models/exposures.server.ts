import type { Knex } from "knex";
import type { SessionUser } from "../context";
import { z } from "zod";
import { DUE_SOON_DAYS } from "../services/coupon-rules";
import { fitsMounting, misfitMessage } from "../services/coupon-fit";
import { blank, multilineText, optionalText, type FormInput } from "../services/form-fields";
import { readLocalInput } from "../services/time";
import type { Db } from "../services/db.server";
import { Forbidden, Invalid, NotFoundInTenant, type FieldErrors } from "../services/outcome";
import { can } from "../services/permissions";
import { actorOf, recordAudit } from "./audit.server";
import { contractorSeesSite, coveredSiteIds, couponWorkSiteIds } from "./contract-coverage.server";

/**
 * Coupon exposures: the pull schedule, coupons waiting for lab results, and exchanges
 * at a point (remove the coupon in service, install the next). Every function takes the
 * acting user and filters by their organisation in SQL. A contractor works only at sites
 * an active contract covers with the coupon-monitoring scope; owner staff read
 * everything of their own organisation.
 */

export { DUE_SOON_DAYS };

export type ScheduleRow = {
  pointId: string;
  pointTag: string;
  siteId: string;
  siteName: string;
  siteCode: string;
  timeZone: string;
  circuitTag: string;
  orientation: string;
  accessFitting: string;
  plannedExposureDays: number;
  exposureId: string | null;
  couponSerial: string | null;
  installedAt: string | null;
  daysInService: number | null;
  dueOn: string | null;
  daysToDue: number | null;
  state: "overdue" | "due" | "in service" | "empty";
};

/** A pull-schedule row as PostgreSQL returns it. */
type ScheduleDbRow = {
  point_id: string;
  point_tag: string;
  site_id: string;
  site_name: string;
  site_code: string;
  time_zone: string;
  circuit_tag: string;
  orientation: string;
  access_fitting: string;
  planned_exposure_days: number;
  exposure_id: string | null;
  coupon_serial: string | null;
  installed_at: Date | null;
  days_in_service: number | null;
  due_on: string | null;
  days_to_due: number | null;
};

export async function pullSchedule(conn: Db, user: SessionUser): Promise<ScheduleRow[]> {
  const result = await conn.raw<{ rows: ScheduleDbRow[] }>(
    `select p.id as point_id, p.tag as point_tag, s.id as site_id, s.name as site_name, s.code as site_code,
            s.time_zone, c.tag as circuit_tag, p.orientation, p.access_fitting, p.planned_exposure_days,
            e.id as exposure_id, cp.serial as coupon_serial, e.installed_at,
            floor(extract(epoch from now() - e.installed_at) / 86400)::int as days_in_service,
            to_char((e.installed_at + make_interval(days => p.planned_exposure_days)) at time zone s.time_zone, 'YYYY-MM-DD') as due_on,
            ceil(extract(epoch from (e.installed_at + make_interval(days => p.planned_exposure_days)) - now()) / 86400)::int as days_to_due
       from monitoring_points p
       join circuits c on c.id = p.circuit_id
       join sites s on s.id = p.site_id
       left join coupon_exposures e on e.point_id = p.id and e.removed_at is null
       left join coupons cp on cp.id = e.coupon_id
      where p.active and p.kind = 'coupon' and p.site_id in (?)
      order by s.name, p.tag`,
    [couponWorkSiteIds(conn, user)],
  );
  return result.rows.map((r): ScheduleRow => ({
    pointId: r.point_id,
    pointTag: r.point_tag,
    siteId: r.site_id,
    siteName: r.site_name,
    siteCode: r.site_code,
    timeZone: r.time_zone,
    circuitTag: r.circuit_tag,
    orientation: r.orientation,
    accessFitting: r.access_fitting,
    plannedExposureDays: r.planned_exposure_days,
    exposureId: r.exposure_id,
    couponSerial: r.coupon_serial,
    installedAt: r.installed_at ? new Date(r.installed_at).toISOString() : null,
    daysInService: r.days_in_service,
    dueOn: r.due_on,
    daysToDue: r.days_to_due,
    state:
      !r.exposure_id || r.days_to_due === null
        ? "empty"
        : r.days_to_due < 0
          ? "overdue"
          : r.days_to_due <= DUE_SOON_DAYS
            ? "due"
            : "in service",
  }));
}

/** Removed coupons whose lab results are not yet in a submission sent for review or approved. */
export type AwaitingLabRow = {
  exposureId: string;
  pointTag: string;
  siteName: string;
  timeZone: string;
  couponSerial: string;
  removedAt: Date;
  has_draft: boolean;
};

/** Removed coupons of the user's sites with no submitted or approved result (aliases e, p, s, cp). */
function awaitingLabQuery(conn: Db, user: SessionUser): Knex.QueryBuilder {
  return conn("coupon_exposures as e")
    .join("monitoring_points as p", "p.id", "e.point_id")
    .join("sites as s", "s.id", "p.site_id")
    .join("coupons as cp", "cp.id", "e.coupon_id")
    .whereNotNull("e.removed_at")
    .whereIn("p.site_id", couponWorkSiteIds(conn, user))
    .modify((q) => {
      if (user.organisation.kind === "contractor") q.where("e.removed_by_organisation_id", user.organisation.id);
    })
    .whereNotExists(
      conn("coupon_results as r")
        .join("submissions as sub", "sub.id", "r.submission_id")
        .whereRaw("r.exposure_id = e.id")
        .whereIn("sub.status", ["submitted", "approved"]),
    );
}

const hasDraftSql =
  "exists (select 1 from coupon_results r join submissions sub on sub.id = r.submission_id where r.exposure_id = e.id and sub.status in ('draft','returned'))";

/**
 * Removed coupons waiting for lab results (`hasDraft: false`) or with results entered in
 * an open submission (`hasDraft: true`), oldest removal first: one page, with the count.
 */
export async function awaitingLab(
  conn: Db,
  user: SessionUser,
  filter: { hasDraft: boolean },
  page: { number: number; size: number } = { number: 1, size: 50 },
): Promise<{ items: AwaitingLabRow[]; total: number; number: number; size: number }> {
  const matching = () => awaitingLabQuery(conn, user).whereRaw(filter.hasDraft ? hasDraftSql : `not ${hasDraftSql}`);
  const counted = await matching().count<{ n: string }[]>({ n: "*" }).first();
  const total = Number(counted?.n ?? 0);
  const last = Math.max(1, Math.ceil(total / page.size));
  const number = Math.min(Math.max(1, Math.floor(page.number) || 1), last);
  const items: AwaitingLabRow[] = await matching()
    .orderBy(["e.removed_at", "e.id"])
    .limit(page.size)
    .offset((number - 1) * page.size)
    .select(
      "e.id as exposureId",
      "p.tag as pointTag",
      "s.name as siteName",
      "s.time_zone as timeZone",
      "cp.serial as couponSerial",
      "e.removed_at as removedAt",
      conn.raw(`${hasDraftSql} as has_draft`),
    );
  return { items, total, number, size: page.size };
}

export type PointForWork = {
  id: string;
  tag: string;
  ownerId: string;
  siteId: string;
  siteName: string;
  timeZone: string;
  circuitTag: string;
  materialCode: string;
  orientation: string;
  accessFitting: string;
  mounting: string;
  plannedExposureDays: number;
  current: null | {
    exposureId: string;
    couponSerial: string;
    materialCode: string;
    shape: string;
    installedAt: string;
  };
};

/**
 * The point if the user may record coupon work there. Owner staff and contractors
 * without any contract at the site get NotFound (existence stays hidden); a contractor
 * with a contract of another scope gets Forbidden.
 */
export async function pointForWork(conn: Db, user: SessionUser, pointId: string): Promise<PointForWork> {
  if (!can(user, "recordWork")) throw new Forbidden("Only contractor technicians record coupon exchanges.");
  const p = await conn("monitoring_points as p")
    .join("sites as s", "s.id", "p.site_id")
    .join("circuits as c", "c.id", "p.circuit_id")
    .where("p.id", pointId)
    .first(
      "p.id",
      "p.tag",
      "p.owner_id",
      "p.site_id",
      "s.name as site_name",
      "s.time_zone",
      "c.tag as circuit_tag",
      "c.material_code",
      "p.orientation",
      "p.access_fitting",
      "p.mounting",
      "p.planned_exposure_days",
      "p.active",
    );
  if (!p || !(await contractorSeesSite(conn, user, p.site_id))) throw new NotFoundInTenant("monitoring point");
  const allowed = await coveredSiteIds(conn, user.organisation.id, "coupon_monitoring")
    .where("cs.site_id", p.site_id)
    .first();
  if (!allowed) throw new Forbidden("Your company's contract at this site does not cover coupon monitoring.");
  if (!p.active) throw new Forbidden("This monitoring point is out of use; ask the owner's engineer.");
  const cur = await conn("coupon_exposures as e")
    .join("coupons as cp", "cp.id", "e.coupon_id")
    .where("e.point_id", pointId)
    .whereNull("e.removed_at")
    .first("e.id", "cp.serial", "cp.material_code", "cp.shape", "e.installed_at");
  return {
    id: p.id,
    tag: p.tag,
    ownerId: p.owner_id,
    siteId: p.site_id,
    siteName: p.site_name,
    timeZone: p.time_zone,
    circuitTag: p.circuit_tag,
    materialCode: p.material_code,
    orientation: p.orientation,
    accessFitting: p.access_fitting,
    mounting: p.mounting,
    plannedExposureDays: p.planned_exposure_days,
    current: cur
      ? {
          exposureId: cur.id,
          couponSerial: cur.serial,
          materialCode: cur.material_code,
          shape: cur.shape,
          installedAt: new Date(cur.installed_at).toISOString(),
        }
      : null,
  };
}

export type StockCoupon = { serial: string; materialCode: string; shape: string };

/** Coupons of the owner still in stock (never exposed), for the "install next" choice. */
export async function couponsInStock(conn: Db, ownerId: string): Promise<StockCoupon[]> {
  return conn("coupons as c")
    .where("c.owner_id", ownerId)
    .whereNotExists(conn("coupon_exposures as e").whereRaw("e.coupon_id = c.id"))
    .orderBy("c.serial")
    .select("c.serial", "c.material_code as materialCode", "c.shape");
}

/** The owner's stock split by whether each coupon fits the point's mounting (services/coupon-fit.ts). */
export async function stockForPoint(
  conn: Db,
  point: Pick<PointForWork, "ownerId" | "mounting">,
): Promise<{ fitting: StockCoupon[]; notFitting: number }> {
  const stock = await couponsInStock(conn, point.ownerId);
  const fitting = stock.filter((c) => fitsMounting(point.mounting, c.shape));
  return { fitting, notFitting: stock.length - fitting.length };
}

export type ExchangeInput = {
  /** ISO instants (already converted from the site's wall-clock time). */
  removedAt?: string | null;
  deposits?: string;
  pittingVisible?: boolean | null;
  damage?: string;
  notes?: string;
  installSerial?: string | null;
  installedAt?: string | null;
};

/** The exchange form's fields as typed; each is checked on its own so one mistake hides no other. */
export const exchangeFormSchema = z.object({
  removedAt: optionalText("the removal time", 40),
  deposits: optionalText("the deposits", 500),
  pittingVisible: z.preprocess(
    (v) => (blank(v) ? "" : v),
    z.enum(["", "yes", "no"], { error: "Say whether pitting was visible: yes, no, or not recorded." }),
  ),
  damage: optionalText("the damage", 500),
  notes: multilineText("the notes", 2000),
  installSerial: optionalText("the coupon serial", 60),
  installedAt: optionalText("the installation time", 40),
});

/**
 * Reads the exchange form: every field's problem at once, wall times at the site turned
 * into instants (a time in the hour skipped by a clock change is refused in words).
 */
export function readExchangeForm(typed: FormInput, timeZone: string): { input: ExchangeInput; errors: FieldErrors } {
  const errors: FieldErrors = {};
  const v: Record<string, string> = {};
  for (const [field, schema] of Object.entries(exchangeFormSchema.shape)) {
    const r = (schema as z.ZodType<string>).safeParse(typed[field]);
    if (r.success) v[field] = r.data;
    else errors[field] = r.error.issues[0]?.message ?? "This value is not valid.";
  }
  const instant = (field: "removedAt" | "installedAt"): string | null => {
    if (!v[field]) return null;
    const reading = readLocalInput(v[field], timeZone);
    if (reading.ok) return reading.instant;
    errors[field] ??= reading.message;
    return null;
  };
  const removedAt = instant("removedAt");
  const installedAt = instant("installedAt");
  if (v.installSerial && v.installedAt === "") errors.installedAt ??= "Enter when the new coupon went in.";
  if (v.installSerial === "" && v.installedAt) errors.installSerial ??= "Choose the coupon that went in.";
  return {
    input: {
      removedAt,
      deposits: v.deposits ?? "",
      pittingVisible: v.pittingVisible === "yes" ? true : v.pittingVisible === "no" ? false : null,
      damage: v.damage ?? "",
      notes: v.notes ?? "",
      installSerial: v.installSerial || null,
      installedAt,
    },
    errors,
  };
}

type ExchangeResult = { removedExposureId: string | null; installedExposureId: string | null };

/**
 * Removes the coupon in service and/or installs the next one, in one transaction.
 * Throws Invalid with every field's problem (nothing written) or returns the ids touched.
 */
export async function recordExchange(
  conn: Knex,
  user: SessionUser,
  pointId: string,
  input: ExchangeInput,
  requestId?: string,
): Promise<ExchangeResult> {
  return exchange(conn, user, pointId, () => ({ input, errors: {} }), requestId);
}

/** recordExchange from the exchange form as typed (site wall times), with every field's problem in one round. */
export async function recordExchangeForm(
  conn: Knex,
  user: SessionUser,
  pointId: string,
  typed: FormInput,
  requestId?: string,
): Promise<ExchangeResult> {
  return exchange(conn, user, pointId, (point) => readExchangeForm(typed, point.timeZone), requestId);
}

async function exchange(
  conn: Knex,
  user: SessionUser,
  pointId: string,
  read: (point: PointForWork) => { input: ExchangeInput; errors: FieldErrors },
  requestId?: string,
): Promise<ExchangeResult> {
  return conn.transaction(async (trx) => {
    const point = await pointForWork(trx, user, pointId);
    // Lock the point's exposures so two technicians cannot exchange at once.
    await trx.raw("select id from monitoring_points where id = ? for update", [pointId]);
    const { input, errors } = read(point);
    // The first problem found for a field is the one shown; the form's own are found first.
    const refuse = (field: string, message: string) => {
      errors[field] ??= message;
    };
    const typedWrong = ["removedAt", "installSerial", "installedAt"].some((f) => f in errors);
    const now = Date.now() + 5 * 60_000; // tolerate a few minutes of clock difference
    const current = await trx("coupon_exposures")
      .where({ point_id: pointId })
      .whereNull("removed_at")
      .first("id", "installed_at", "coupon_id");
    if (!current && input.removedAt)
      refuse("removedAt", "No coupon is in service at this point, so there is nothing to remove.");
    if (current && !input.removedAt && input.installSerial)
      refuse("removedAt", "A coupon is still in service here: record its removal before installing the next one.");
    if (!input.removedAt && !input.installSerial && !typedWrong)
      refuse("form", "Record a removal, an installation, or both.");
    if (current && input.removedAt) {
      const removed = Date.parse(input.removedAt);
      if (!Number.isFinite(removed)) refuse("removedAt", "Enter the removal date and time.");
      else if (removed <= new Date(current.installed_at).getTime())
        refuse("removedAt", "The removal must be after the coupon was installed.");
      else if (removed > now) refuse("removedAt", "The removal time is in the future.");
    }
    let coupon: { id: string; shape: string } | undefined;
    if (input.installSerial) {
      const serial = input.installSerial.trim();
      coupon = await trx("coupons").where({ owner_id: point.ownerId, serial }).first("id", "shape");
      if (!coupon) refuse("installSerial", `There is no coupon ${serial} in the owner's stock.`);
      else if (await trx("coupon_exposures").where({ coupon_id: coupon.id }).first("id"))
        refuse("installSerial", `Coupon ${serial} has already been exposed; every coupon is used once.`);
      else if (!fitsMounting(point.mounting, coupon.shape))
        refuse("installSerial", misfitMessage(serial, coupon.shape, point.mounting));
      const installed = input.installedAt ? Date.parse(input.installedAt) : NaN;
      if (!Number.isFinite(installed)) refuse("installedAt", "Enter the installation date and time.");
      else if (installed > now) refuse("installedAt", "The installation time is in the future.");
      else if (input.removedAt && installed < Date.parse(input.removedAt))
        refuse("installedAt", "The next coupon cannot go in before the previous one came out.");
      else if (!current) {
        const last = await trx("coupon_exposures").where({ point_id: pointId }).max({ at: "removed_at" }).first();
        if (last?.at && installed < new Date(last.at).getTime())
          refuse("installedAt", "This is before the last coupon at this point was removed.");
      }
    }
    if (Object.keys(errors).length) throw new Invalid(errors);

    const actor = actorOf(user);
    let removedExposureId: string | null = null;
    if (current && input.removedAt) {
      const after = {
        removed_at: input.removedAt,
        removed_by: user.id,
        removed_by_organisation_id: user.organisation.id,
        deposits: input.deposits?.trim() ?? "",
        pitting_visible: input.pittingVisible ?? null,
        damage: input.damage?.trim() ?? "",
        notes: input.notes?.trim() ?? "",
        updated_at: trx.fn.now(),
      };
      await trx("coupon_exposures").where({ id: current.id }).update(after);
      removedExposureId = current.id;
      await recordAudit(trx, {
        ownerId: point.ownerId,
        actor,
        action: "coupon.removed",
        recordType: "coupon_exposure",
        recordId: current.id,
        before: { removed_at: null },
        after: { ...after, updated_at: undefined, point: point.tag },
        requestId,
      });
    }
    let installedExposureId: string | null = null;
    if (coupon && input.installedAt) {
      const [row] = await trx("coupon_exposures")
        .insert({
          owner_id: point.ownerId,
          point_id: pointId,
          coupon_id: coupon.id,
          installed_at: input.installedAt,
          installed_by: user.id,
          installed_by_organisation_id: user.organisation.id,
        })
        .returning("id");
      installedExposureId = row.id;
      await recordAudit(trx, {
        ownerId: point.ownerId,
        actor,
        action: "coupon.installed",
        recordType: "coupon_exposure",
        recordId: row.id,
        after: { point: point.tag, coupon: input.installSerial, installed_at: input.installedAt },
        requestId,
      });
    }
    return { removedExposureId, installedExposureId };
  });
}
