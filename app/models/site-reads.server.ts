import type { Db } from "../services/db.server";

/** Reads of an owner's sites for pickers and filters. */

type SiteRow = { id: string; owner_id: string; name: string; code: string };

export type SiteChoice = Pick<SiteRow, "id" | "name">;

/** The owner's own sites by name. */
export async function ownerSiteChoices(conn: Db, ownerId: string): Promise<SiteChoice[]> {
  return conn<SiteRow>("sites").where({ owner_id: ownerId }).orderBy("name").select("id", "name");
}
