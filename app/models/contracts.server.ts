import { dateField, isCalendarDate, plainCharacters } from "../services/form-fields";
import { z } from "zod";
import type { SessionUser } from "../context";
import type { Db } from "../services/db.server";
import { isUuid } from "../services/ids";
import { sentVersion } from "../services/form-fields";
import { Conflict, Forbidden, Invalid, NotFoundInTenant, parseOrThrow } from "../services/outcome";
import { can, scopeLabels, type ScopeOfWork } from "../services/permissions";
import { actorOf, auditedWrite, changedKeys } from "./audit.server";
import { ACTIVE_CONTRACT_SQL } from "./contract-coverage.server";
import { engagedContractors } from "./users.server";

/**
 * Contracts between an owner and its contractors: which sites, which work, which
 * days. Every query here is filtered by the owner in SQL; a contract id of another
 * owner finds nothing.
 */

export type ContractStatus = "active" | "upcoming" | "ended";

export type ContractSite = { id: string; name: string; code: string };
/** The columns of contracts the writes read (lock, reference check). */
type ContractRecord = { id: string; owner_id: string; reference: string };
/** The columns of sites a contract reads. */
type SiteRecord = ContractSite & { owner_id: string };

export type ContractRow = {
  id: string;
  reference: string;
  contractor_id: string;
  contractor_name: string;
  scope: ScopeOfWork[];
  /** YYYY-MM-DD, the first day covered. */
  starts_on: string;
  /** YYYY-MM-DD, the last day covered (inclusive); null when open-ended. */
  ends_on: string | null;
  status: ContractStatus;
  sites: ContractSite[];
  created_at: Date;
  updated_at: Date;
  /** Bumped by every edit; a form sends the version it showed. */
  version: number;
};

export type CreatedContract = { contractId: string; contractorId: string };
export type UpdatedContract = { changed: boolean };
export type EndedContract = { endsOn: string };

/**
 * Active / upcoming / ended by the calendar of the contract's sites, the same definition
 * the tenant queries use (ACTIVE_CONTRACT_SQL in models/contract-coverage.server.ts):
 * active while in force at any of its sites; upcoming while it has not started at any;
 * otherwise ended. ends_on is the last day covered.
 */
const statusSql = `case when exists (select 1 from contract_sites cs where cs.contract_id = c.id and ${ACTIVE_CONTRACT_SQL}) then 'active'
                        when c.starts_on > coalesce((select min(site_today(cs.site_id)) from contract_sites cs where cs.contract_id = c.id), current_date) then 'upcoming'
                        else 'ended' end`;

const contractSelect = `
  select c.id, c.reference, c.contractor_id, o.name as contractor_name, c.scope,
         c.starts_on::text as starts_on, c.ends_on::text as ends_on,
         ${statusSql} as status, c.created_at, c.updated_at, c.version,
         coalesce((select json_agg(json_build_object('id', s.id, 'name', s.name, 'code', s.code) order by s.name)
                     from contract_sites cs join sites s on s.id = cs.site_id
                    where cs.contract_id = c.id), '[]'::json) as sites
    from contracts c
    join organisations o on o.id = c.contractor_id`;

/** The owner's contracts: in force first, then upcoming, then ended; newest start first. */
export async function listContracts(conn: Db, ownerId: string): Promise<ContractRow[]> {
  const result = await conn.raw<{ rows: ContractRow[] }>(
    `${contractSelect}
      where c.owner_id = ?
      order by case ${statusSql} when 'active' then 0 when 'upcoming' then 1 else 2 end, c.starts_on desc, c.reference`,
    [ownerId],
  );
  return result.rows;
}

/** One contract of this owner, or undefined (also for another owner's id). */
export async function getContract(conn: Db, ownerId: string, contractId: string): Promise<ContractRow | undefined> {
  if (!isUuid(contractId)) return undefined;
  const result = await conn.raw<{ rows: ContractRow[] }>(`${contractSelect} where c.owner_id = ? and c.id = ?`, [
    ownerId,
    contractId,
  ]);
  return result.rows[0];
}

/** The owner's own sites, the only ones a contract may cover. */
export async function contractSiteChoices(conn: Db, ownerId: string): Promise<ContractSite[]> {
  return conn<SiteRecord>("sites").where({ owner_id: ownerId }).orderBy("name").select("id", "name", "code");
}

/** Today and yesterday by the database's calendar (the one contract status uses). */
export async function contractCalendar(conn: Db): Promise<{ today: string; yesterday: string }> {
  const result = await conn.raw<{ rows: Array<{ today: string; yesterday: string }> }>(
    `select current_date::text as today, (current_date - 1)::text as yesterday`,
  );
  return result.rows[0];
}

// ── Validation ────────────────────────────────────────────────────────────────

const blankToUndefined = (v: unknown) => (typeof v === "string" && v.trim() === "" ? undefined : v);

const scopeValues = Object.keys(scopeLabels) as [ScopeOfWork, ...ScopeOfWork[]];

const termsShape = {
  siteIds: z
    .array(z.string().refine(isUuid, "Choose sites from the list."), {
      error: "Tick at least one site the contract covers.",
    })
    .min(1, "Tick at least one site the contract covers."),
  scope: z
    .array(z.enum(scopeValues, { error: "Choose coupon monitoring, thickness inspection or both." }), {
      error: "Tick at least one kind of work.",
    })
    .min(1, "Tick at least one kind of work: coupon monitoring, thickness inspection or both."),
  startsOn: dateField("the first day"),
  endsOn: z.preprocess(blankToUndefined, dateField("the last day").optional()),
};

function endNotBeforeStart(v: { startsOn: string; endsOn?: string }, ctx: z.RefinementCtx) {
  // Compared only when both are real dates; otherwise their own messages say what is wrong.
  if (v.endsOn && isCalendarDate(v.endsOn) && isCalendarDate(v.startsOn) && v.endsOn < v.startsOn)
    ctx.addIssue({
      code: "custom",
      path: ["endsOn"],
      message: `The last day cannot be before the first day (${v.startsOn}).`,
    });
}

/** Edit of an existing contract: sites, scope and dates. */
export const contractTermsSchema = z.object(termsShape).superRefine(endNotBeforeStart);

/** A new contract. The contractor is an existing one of this owner's, or a new company by name. */
export const newContractSchema = z
  .object({
    contractorId: z.preprocess(blankToUndefined, z.string().optional()),
    /** Present (even empty) when the user chose "a company not listed yet". */
    newContractorName: z
      .string()
      .trim()
      .max(200, "Keep the company name under 200 characters.")
      .superRefine(plainCharacters("the company name"))
      .optional(),
    reference: z
      .string({ error: "Type the contract or purchase-order reference." })
      .trim()
      .min(1, "Type the contract or purchase-order reference.")
      .max(80, "Keep the reference under 80 characters.")
      .superRefine(plainCharacters("the reference")),
    ...termsShape,
  })
  .superRefine((v, ctx) => {
    endNotBeforeStart(v, ctx);
    if (v.newContractorName !== undefined) {
      if (v.newContractorName === "")
        ctx.addIssue({ code: "custom", path: ["newContractorName"], message: "Type the contractor company’s name." });
    } else if (!v.contractorId) {
      ctx.addIssue({
        code: "custom",
        path: ["contractorId"],
        message: "Choose the contractor, or choose “A company not listed yet” and type its name.",
      });
    }
  });

export const endContractSchema = z.object({
  endsOn: dateField("the last day of the contract"),
  reason: z
    .string()
    .trim()
    .max(500, "Keep the reason under 500 characters.")
    .superRefine(plainCharacters("the reason"))
    .optional(),
});

/** Refuses any site that is not this owner's (checked in SQL, not trusted from the form). */
async function ownSites(conn: Db, ownerId: string, siteIds: string[]): Promise<ContractSite[]> {
  const ids = [...new Set(siteIds.map((s) => s.toLowerCase()))];
  const rows = await conn<SiteRecord>("sites")
    .where("owner_id", ownerId)
    .whereIn("id", ids)
    .orderBy("name")
    .select("id", "name", "code");
  if (rows.length !== ids.length)
    throw new Invalid({ siteIds: "One or more of the ticked sites is not one of your organisation’s sites." });
  return rows;
}

/** What the audit trail keeps of a contract: readable values, not ids only. */
function snapshot(c: {
  reference: string;
  contractor: string;
  scope: string[];
  starts_on: string;
  ends_on: string | null;
  sites: ContractSite[];
}) {
  return {
    reference: c.reference,
    contractor: c.contractor,
    sites: c.sites.map((s) => s.code).sort(),
    scope: [...c.scope].sort(),
    starts_on: c.starts_on,
    ends_on: c.ends_on,
  };
}

// ── Writes ────────────────────────────────────────────────────────────────────

function mayManageContracts(user: SessionUser) {
  if (!can(user, "manageContracts")) throw new Forbidden("Your role does not allow this.");
}

const referenceTaken = (reference: string) => ({
  reference: `You already have a contract with the reference ${reference}.`,
});

export async function createContract(
  conn: Db,
  admin: SessionUser,
  input: unknown,
  requestId?: string | null,
): Promise<CreatedContract> {
  mayManageContracts(admin);
  const v = parseOrThrow(newContractSchema, input);
  const ownerId = admin.organisation.id;

  return auditedWrite(
    conn,
    { ownerId, actor: actorOf(admin), requestId },
    async ({ trx, record }) => {
      const engaged = await engagedContractors(trx, ownerId);
      let contractor: { id: string; name: string };
      if (v.newContractorName !== undefined) {
        const wanted = v.newContractorName.toLowerCase();
        const same = engaged.find((c) => c.name.trim().toLowerCase() === wanted);
        if (same)
          throw new Invalid({
            newContractorName: `${same.name} is already one of your contractors; choose it from the list.`,
          });
        // A new name is always a new organisation: matching another owner's contractor by
        // name would let this owner invite people into a company it has no relation with.
        const [created] = await trx("organisations")
          .insert({ name: v.newContractorName, kind: "contractor" })
          .returning<Array<{ id: string; name: string }>>(["id", "name"]);
        contractor = created;
        await record({
          action: "contractor.added",
          recordType: "organisation",
          recordId: created.id,
          after: { name: created.name, kind: "contractor" },
        });
      } else {
        const wanted = (v.contractorId ?? "").toLowerCase();
        const found = engaged.find((c) => c.id === wanted);
        if (!found)
          throw new Invalid({ contractorId: "Choose one of your contractors from the list, or add a new company." });
        contractor = found;
      }

      const sites = await ownSites(trx, ownerId, v.siteIds);

      const taken = await trx<ContractRecord>("contracts")
        .where({ owner_id: ownerId, reference: v.reference })
        .first("id");
      if (taken) throw new Invalid(referenceTaken(v.reference));

      const scope = [...new Set(v.scope)].sort();
      const [row] = await trx("contracts")
        .insert({
          owner_id: ownerId,
          contractor_id: contractor.id,
          reference: v.reference,
          scope,
          starts_on: v.startsOn,
          ends_on: v.endsOn ?? null,
        })
        .returning<Array<{ id: string }>>(["id"]);
      await trx("contract_sites").insert(sites.map((s) => ({ contract_id: row.id, site_id: s.id })));
      await record({
        action: "contract.created",
        recordType: "contract",
        recordId: row.id,
        after: snapshot({
          reference: v.reference,
          contractor: contractor.name,
          scope,
          starts_on: v.startsOn,
          ends_on: v.endsOn ?? null,
          sites,
        }),
      });
      return { contractId: row.id, contractorId: contractor.id };
    },
    { contracts_owner_reference_key: referenceTaken(v.reference) },
  );
}

/**
 * Locks the owner's contract row for the rest of the transaction (two admins editing at
 * once); a form made from an older version than the stored one is a Conflict.
 */
async function lockContract(trx: Db, ownerId: string, contractId: string, version?: number): Promise<ContractRow> {
  if (!isUuid(contractId)) throw new NotFoundInTenant("contract");
  const locked = await trx<ContractRecord>("contracts")
    .where({ id: contractId, owner_id: ownerId })
    .forUpdate()
    .first("id");
  const current = locked ? await getContract(trx, ownerId, contractId) : undefined;
  if (!current) throw new NotFoundInTenant("contract");
  if (version !== undefined && version !== current.version)
    throw new Conflict(
      `Contract ${current.reference} was changed by someone else after you opened this page. Reload the page to see its current terms, then make your change again.`,
    );
  return current;
}

/** Changes a contract's sites, scope and dates. */
export async function updateContract(
  conn: Db,
  admin: SessionUser,
  contractId: string,
  input: unknown,
  requestId?: string | null,
): Promise<UpdatedContract> {
  mayManageContracts(admin);
  const v = parseOrThrow(contractTermsSchema, input);
  const version = sentVersion(input);
  const ownerId = admin.organisation.id;
  return auditedWrite(conn, { ownerId, actor: actorOf(admin), requestId }, async ({ trx, record }) => {
    const current = await lockContract(trx, ownerId, contractId, version);
    const sites = await ownSites(trx, ownerId, v.siteIds);

    const before = snapshot({ ...current, contractor: current.contractor_name });
    const after = snapshot({
      ...current,
      contractor: current.contractor_name,
      scope: [...new Set(v.scope)],
      starts_on: v.startsOn,
      ends_on: v.endsOn ?? null,
      sites,
    });
    if (changedKeys(before, after).length === 0) return { changed: false };

    await trx("contracts")
      .where({ id: current.id, owner_id: ownerId })
      .update({
        scope: after.scope,
        starts_on: v.startsOn,
        ends_on: v.endsOn ?? null,
        version: trx.raw("version + 1"),
        updated_at: trx.fn.now(),
      });
    const keep = sites.map((s) => s.id);
    await trx("contract_sites").where({ contract_id: current.id }).whereNotIn("site_id", keep).delete();
    await trx("contract_sites")
      .insert(keep.map((id) => ({ contract_id: current.id, site_id: id })))
      .onConflict(["contract_id", "site_id"])
      .ignore();
    await record({ action: "contract.updated", recordType: "contract", recordId: current.id, before, after });
    return { changed: true };
  });
}

/**
 * Ends a contract on a chosen last day (the screen suggests yesterday, so the
 * contractor's access stops today). Only shortens: a later end is an edit of the dates.
 */
export async function endContract(
  conn: Db,
  admin: SessionUser,
  contractId: string,
  input: unknown,
  requestId?: string | null,
): Promise<EndedContract> {
  mayManageContracts(admin);
  const { endsOn, reason } = parseOrThrow(endContractSchema, input);
  const version = sentVersion(input);
  const ownerId = admin.organisation.id;
  return auditedWrite(conn, { ownerId, actor: actorOf(admin), requestId }, async ({ trx, record }) => {
    const current = await lockContract(trx, ownerId, contractId, version);
    if (endsOn < current.starts_on)
      throw new Invalid({
        endsOn: `This contract starts on ${current.starts_on}; its last day cannot be before that.`,
      });
    if (current.ends_on && endsOn > current.ends_on)
      throw new Invalid({
        endsOn: `The contract already ends on ${current.ends_on}. To extend it, change its dates instead.`,
      });
    if (current.ends_on === endsOn) return { endsOn };
    await trx("contracts")
      .where({ id: current.id, owner_id: ownerId })
      .update({ ends_on: endsOn, version: trx.raw("version + 1"), updated_at: trx.fn.now() });
    await record({
      action: "contract.ended",
      recordType: "contract",
      recordId: current.id,
      before: { reference: current.reference, ends_on: current.ends_on },
      after: { reference: current.reference, ends_on: endsOn },
      reason: reason || null,
    });
    return { endsOn };
  });
}
