import type { Db } from "../services/db.server";

/** The next submission reference at a site, from the one database sequence. */
export async function nextReference(trx: Db, siteId: string): Promise<string> {
  const site = await trx("sites").where({ id: siteId }).first("code");
  const { rows } = await trx.raw("select nextval('submission_number_seq') as n");
  return `${site.code}-SUB-${String(rows[0].n).padStart(5, "0")}`;
}
