import type { Db } from "../services/db.server";

/** The next submission reference at each of the sites (in one query), from the one database sequence. */
export async function nextReferences(trx: Db, siteIds: string[]): Promise<Map<string, string>> {
  const { rows } = await trx.raw<{ rows: Array<{ id: string; code: string; n: string }> }>(
    `select s.id, s.code, nextval('submission_number_seq') as n
       from (select id, code from sites where id = any(?::uuid[]) order by code) s`,
    [siteIds],
  );
  return new Map(rows.map((r) => [r.id, `${r.code}-SUB-${String(r.n).padStart(5, "0")}`]));
}
