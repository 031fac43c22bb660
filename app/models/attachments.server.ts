import { randomUUID } from "node:crypto";
import type { Knex } from "knex";
import type { SessionUser } from "../context";
import type { Db } from "../services/db.server";
import {
  attachmentKeys,
  deleteObject,
  identify,
  identifyCsvExport,
  surveyAttachmentKeys,
  makeThumbnail,
  putObject,
  sha256Hex,
  storeDown,
  storeNeverReached,
  UploadProblem,
  type ReceivedFile,
} from "../services/uploads.server";
import {
  attachmentKinds,
  type AttachmentKind,
  type AttachmentView,
  type SurveyAttachmentKind,
} from "../services/attachment-kinds";
import { actorOf, recordAudit } from "./audit.server";
import { exposureForLab, type ExposureForLab } from "./lab-results.server";
import { Forbidden, NotFoundInTenant as NotFound } from "../services/outcome";
import { cleanFileName } from "../services/file-names";
import { isUuid } from "../services/ids";
import { can } from "../services/permissions";
import { coveredSiteIds } from "./contract-coverage.server";
import { getSurvey, type Survey } from "./thickness-surveys.server";

/**
 * Photos and lab sheets of a removed coupon, and the files of a thickness survey (its
 * sheet, photos and the instrument's CSV export). Who may see a survey's files follows the
 * survey: the contractor that records it while a thickness-inspection contract covers the
 * site, and the owner's staff once it is submitted. For a coupon's files, who may see them follows the lab rule
 * (exposureForLab): the contractor that removed the coupon, while an active
 * coupon-monitoring contract covers the site, and the owner's staff. The contractor
 * adds and removes them until the results are in a submission sent for review or approved.
 *
 * The store and the table are kept consistent by the row's state: 'pending' is written
 * before an object goes up and turned 'stored' after; a removal turns the row back to
 * 'pending' before its objects are deleted. Whatever is interrupted leaves a pending
 * row that cleanUpPendingAttachments finds.
 */

export { attachmentKinds, type AttachmentKind, type AttachmentView };

// --------------------------------------------------------------------------- visibility

/**
 * Exposures whose attachments this user may read, as a subquery of ids: the same rule
 * as exposureForLab (a removed coupon; owner staff of its owner; technicians of the
 * removing contractor at a site an active coupon-monitoring contract covers).
 */
function readableExposures(conn: Db, user: SessionUser): Knex.QueryBuilder {
  if (user.organisation.kind === "owner") {
    return conn("coupon_exposures").where("owner_id", user.organisation.id).whereNotNull("removed_at").select("id");
  }
  const coveredSites = coveredSiteIds(conn, user.organisation.id, "coupon_monitoring");
  return conn("coupon_exposures as e")
    .join("monitoring_points as p", "p.id", "e.point_id")
    .where("e.removed_by_organisation_id", user.organisation.id)
    .whereNotNull("e.removed_at")
    .whereIn("p.site_id", coveredSites)
    .select("e.id");
}

/**
 * Thickness surveys whose files this user may read, as a subquery of submission ids: the
 * owner's staff once submitted (drafts stay with the contractor, as in submissionsQuery);
 * the contractor's technicians at sites its thickness-inspection contracts in force cover.
 */
function readableSurveys(conn: Db, user: SessionUser): Knex.QueryBuilder {
  const q = conn("submissions as sub").where("sub.kind", "thickness").select("sub.id");
  if (user.organisation.kind === "owner")
    return q.where("sub.owner_id", user.organisation.id).whereNot("sub.status", "draft");
  return q
    .where("sub.contractor_id", user.organisation.id)
    .whereIn("sub.site_id", coveredSiteIds(conn, user.organisation.id, "thickness_inspection"));
}

const viewColumns = [
  "a.id",
  "a.exposure_id",
  "a.kind",
  "a.content_type",
  "a.byte_size",
  "a.original_name",
  "a.thumbnail_key",
  "a.created_at",
  "a.uploaded_by_organisation_id",
  "u.name as uploaded_by_name",
];

/** An attachment row with its uploader's name, as PostgreSQL returns it (bigint as text). */
type AttachmentDbRow = {
  id: string;
  kind: AttachmentView["kind"];
  content_type: string;
  byte_size: string | number;
  original_name: string;
  thumbnail_key: string | null;
  created_at: Date;
  uploaded_by_organisation_id: string;
  uploaded_by_name: string;
};

function toView(r: AttachmentDbRow, canRemove: boolean): AttachmentView {
  return {
    id: r.id,
    kind: r.kind,
    contentType: r.content_type,
    byteSize: Number(r.byte_size),
    name: cleanFileName(r.original_name),
    url: `/attachments/${r.id}`,
    thumbnailUrl: r.thumbnail_key ? `/attachments/${r.id}/thumbnail` : null,
    createdAt: new Date(r.created_at).toISOString(),
    uploadedBy: r.uploaded_by_name,
    canRemove,
  };
}

const mayRemove = (user: SessionUser, uploadedByOrganisationId: string, locked: boolean) =>
  !locked && can(user, "recordWork") && user.organisation.id === uploadedByOrganisationId;

/** The stored attachments of one exposure, oldest first (none if the user may not see it). */
export async function listAttachments(
  conn: Db,
  user: SessionUser,
  exposure: Pick<ExposureForLab, "exposureId" | "locked">,
): Promise<AttachmentView[]> {
  const rows = await conn("attachments as a")
    .join("users as u", "u.id", "a.uploaded_by")
    .where({ "a.exposure_id": exposure.exposureId, "a.state": "stored" })
    .whereIn("a.exposure_id", readableExposures(conn, user))
    .orderBy([{ column: "a.created_at" }, { column: "a.id" }])
    .select(viewColumns);
  return rows.map((r) => toView(r, mayRemove(user, r.uploaded_by_organisation_id, Boolean(exposure.locked))));
}

/** The stored attachments of several exposures (a submission's), by exposure id; read-only. */
export async function attachmentsForExposures(
  conn: Db,
  user: SessionUser,
  exposureIds: string[],
): Promise<Record<string, AttachmentView[]>> {
  const grouped: Record<string, AttachmentView[]> = Object.fromEntries(exposureIds.map((id) => [id, []]));
  if (exposureIds.length === 0) return grouped;
  const rows = await conn("attachments as a")
    .join("users as u", "u.id", "a.uploaded_by")
    .whereIn("a.exposure_id", exposureIds)
    .where("a.state", "stored")
    .whereIn("a.exposure_id", readableExposures(conn, user))
    .orderBy([{ column: "a.kind" }, { column: "a.created_at" }, { column: "a.id" }])
    .select(viewColumns);
  for (const r of rows) (grouped[r.exposure_id] ??= []).push(toView(r, false));
  return grouped;
}

export type AttachmentForViewing = {
  id: string;
  kind: AttachmentKind;
  contentType: string;
  name: string;
  objectKey: string;
  thumbnailKey: string | null;
};

/** One stored attachment, only if the user may see its exposure (otherwise null: a 404). */
export async function attachmentForViewing(
  conn: Db,
  user: SessionUser,
  attachmentId: string | undefined,
): Promise<AttachmentForViewing | null> {
  if (!isUuid(attachmentId)) return null; // a malformed id is not found, like another tenant's
  const r = await conn("attachments as a")
    .where({ "a.id": attachmentId.toLowerCase(), "a.state": "stored" })
    .where((w) =>
      w
        .whereIn("a.exposure_id", readableExposures(conn, user))
        .orWhereIn("a.submission_id", readableSurveys(conn, user)),
    )
    // Checked again here, not only at sign-in: a person disabled since gets no new link.
    .whereExists(
      conn("users as viewer").where({ "viewer.id": user.id, "viewer.status": "active" }).select(conn.raw("1")),
    )
    .first("a.id", "a.kind", "a.content_type", "a.original_name", "a.object_key", "a.thumbnail_key");
  if (!r) return null;
  return {
    id: r.id,
    kind: r.kind,
    contentType: r.content_type,
    name: cleanFileName(r.original_name),
    objectKey: r.object_key,
    thumbnailKey: r.thumbnail_key,
  };
}

// --------------------------------------------------------------------------- changes

/**
 * Waits for any submit of the exposure's open submission to finish, so that the
 * "not yet submitted" check that follows cannot race with it.
 */
async function lockOpenSubmission(trx: Knex.Transaction, exposureId: string): Promise<void> {
  await trx.raw(
    `select sub.id from submissions sub join coupon_results r on r.submission_id = sub.id
      where r.exposure_id = ? and sub.status in ('draft', 'returned') for update of sub`,
    [exposureId],
  );
}

const lockedProblem = (locked: NonNullable<ExposureForLab["locked"]>) =>
  new UploadProblem(
    409,
    `These results are in submission ${locked.reference}, which is ${locked.status}; its photos and lab sheets can no longer change. Ask the owner's engineer to return the submission if something is missing.`,
  );

type StoredObject = { key: string; body: Parameters<typeof putObject>[1]; contentType: string; sha256: string };

/**
 * Puts an attachment's objects (the original, then its thumbnail) into the store. When one
 * fails, what may have reached the store is removed with the pending row (or left to the
 * clean-up) and the upload is refused as "the store is down". Returns the keys stored.
 */
async function storeOrAbandon(conn: Knex, attachmentId: string, objects: StoredObject[]): Promise<string[]> {
  const mayExist: string[] = [];
  try {
    for (const o of objects) {
      try {
        await putObject(o.key, o.body, o.contentType, o.sha256);
        mayExist.push(o.key);
      } catch (error) {
        if (!storeNeverReached(error)) mayExist.push(o.key);
        throw error;
      }
    }
  } catch (error) {
    console.warn(
      `attachments: upload of ${attachmentId} failed (${(error as Error).name}: ${(error as Error).message})`,
    );
    await abandon(conn, attachmentId, mayExist);
    throw storeDown();
  }
  return mayExist;
}

/**
 * Best effort after a failure: removes what may have reached the store, then the
 * pending row. If the store cannot be cleaned, the row stays pending for the clean-up.
 */
async function abandon(conn: Knex, attachmentId: string, keysThatMayExist: string[]): Promise<void> {
  try {
    for (const key of keysThatMayExist) await deleteObject(key);
  } catch (error) {
    console.warn(
      `attachments: ${attachmentId} left pending for the clean-up (${(error as Error).name}: ${(error as Error).message})`,
    );
    return;
  }
  await conn("attachments").where({ id: attachmentId, state: "pending" }).del();
}

/**
 * Checks, stores and records one received file (streamed from its temporary file; the
 * caller discards that). The row is written 'pending' and committed
 * before the upload, so an interrupted upload stays findable; it turns 'stored' with
 * its audit event in one transaction once both objects are in the store.
 */
export async function uploadAttachment(
  conn: Knex,
  user: SessionUser,
  exposureId: string,
  file: ReceivedFile,
  kind: AttachmentKind,
  requestId?: string,
): Promise<AttachmentView> {
  // The name is cleaned once, before it is stored, shown in a message or written to the trail.
  file = { ...file, name: cleanFileName(file.name) };
  const exposure = await exposureForLab(conn, user, exposureId);
  if (!can(user, "recordWork")) throw new Forbidden("Only the contractor's technicians attach photos and lab sheets.");
  if (exposure.locked) throw lockedProblem(exposure.locked);
  if (file.byteSize === 0) throw new UploadProblem(400, `“${file.name}” is empty (0 bytes). Choose the file again.`);

  const type = await identify(file, kind);
  const thumbnail = type.contentType === "application/pdf" ? null : await makeThumbnail(file, type);
  const sha256 = file.sha256;
  const id = randomUUID();
  const keys = attachmentKeys(exposure.ownerId, exposureId, id);
  const row = {
    id,
    owner_id: exposure.ownerId,
    exposure_id: exposureId,
    kind,
    content_type: type.contentType,
    byte_size: file.byteSize,
    sha256,
    object_key: keys.original,
    thumbnail_key: thumbnail ? keys.thumbnail : null,
    original_name: file.name,
    state: "pending",
    uploaded_by: user.id,
    uploaded_by_organisation_id: user.organisation.id,
  };
  await conn("attachments").insert(row);

  const mayExist = await storeOrAbandon(conn, id, [
    { key: keys.original, body: file, contentType: type.contentType, sha256 },
    ...(thumbnail
      ? [{ key: keys.thumbnail, body: thumbnail, contentType: "image/jpeg", sha256: sha256Hex(thumbnail) }]
      : []),
  ]);

  try {
    return await conn.transaction(async (trx) => {
      await lockOpenSubmission(trx, exposureId);
      const now = await exposureForLab(trx, user, exposureId);
      if (now.locked) throw lockedProblem(now.locked);
      const stored = await trx("attachments")
        .where({ id, state: "pending" })
        .update({ state: "stored" })
        .returning("created_at");
      if (stored.length === 0) throw storeDown(); // the clean-up took it meanwhile
      await recordAudit(trx, {
        ownerId: exposure.ownerId,
        actor: actorOf(user),
        action: "attachment.uploaded",
        recordType: "coupon_exposure",
        recordId: exposureId,
        after: {
          attachment: id,
          coupon: exposure.coupon.serial,
          point: exposure.pointTag,
          kind,
          name: file.name,
          content_type: type.contentType,
          byte_size: file.byteSize,
          sha256,
        },
        requestId,
      });
      return toView({ ...row, created_at: stored[0].created_at, uploaded_by_name: user.name }, true);
    });
  } catch (error) {
    await abandon(conn, id, mayExist);
    throw error;
  }
}

/**
 * Removes an attachment while the results are not in a submission sent for review or approved;
 * only the contractor that attached it. The row is hidden (pending) and audited in one
 * transaction; its objects and row go after. If the store is down then, the clean-up
 * finishes the job: the user's removal is done either way.
 */
export async function removeAttachment(
  conn: Knex,
  user: SessionUser,
  exposureId: string,
  attachmentId: string,
  requestId?: string,
): Promise<void> {
  const keys = await conn.transaction(async (trx) => {
    await exposureForLab(trx, user, exposureId); // other tenants: NotFound before anything else
    if (!can(user, "recordWork"))
      throw new Forbidden("Only the contractor's technicians remove photos and lab sheets.");
    await lockOpenSubmission(trx, exposureId);
    const exposure = await exposureForLab(trx, user, exposureId); // read again after the lock: is it submitted now?
    const row = await trx("attachments")
      .where({ id: attachmentId, exposure_id: exposureId, state: "stored" })
      .forUpdate()
      .first(
        "id",
        "kind",
        "original_name",
        "content_type",
        "byte_size",
        "sha256",
        "object_key",
        "thumbnail_key",
        "uploaded_by_organisation_id",
      );
    if (!row) throw new NotFound("photo or lab sheet on this coupon");
    if (row.uploaded_by_organisation_id !== user.organisation.id)
      throw new Forbidden("Only the contractor that attached a file can remove it.");
    if (exposure.locked) throw lockedProblem(exposure.locked);
    await trx("attachments").where({ id: attachmentId }).update({ state: "pending" });
    await recordAudit(trx, {
      ownerId: exposure.ownerId,
      actor: actorOf(user),
      action: "attachment.removed",
      recordType: "coupon_exposure",
      recordId: exposureId,
      before: {
        attachment: row.id,
        coupon: exposure.coupon.serial,
        kind: row.kind,
        name: row.original_name,
        content_type: row.content_type,
        byte_size: row.byte_size,
        sha256: row.sha256,
      },
      requestId,
    });
    return [row.object_key as string, ...(row.thumbnail_key ? [row.thumbnail_key as string] : [])];
  });
  await abandon(conn, attachmentId, keys);
}

/**
 * Deletes what interrupted uploads and removals left: for each pending row older than
 * the given age, its objects (deleting a missing key succeeds), then the row. A row
 * whose objects cannot be deleted now stays for the next run. Run it periodically
 * (every few minutes) with an age well above the longest upload, e.g. 30 minutes.
 */
export async function cleanUpPendingAttachments(
  conn: Knex,
  olderThanMinutes: number,
): Promise<{ removed: number; kept: number }> {
  if (!Number.isFinite(olderThanMinutes) || olderThanMinutes < 0)
    throw new RangeError("olderThanMinutes must be a number of minutes, 0 or more");
  const rows: Array<{ id: string; object_key: string; thumbnail_key: string | null }> = await conn("attachments")
    .where("state", "pending")
    .where("created_at", "<", conn.raw("now() - make_interval(secs => ?)", [olderThanMinutes * 60]))
    .orderBy("created_at")
    .limit(1000)
    .select("id", "object_key", "thumbnail_key");
  let removed = 0;
  let kept = 0;
  for (const r of rows) {
    try {
      await deleteObject(r.object_key);
      if (r.thumbnail_key) await deleteObject(r.thumbnail_key);
      removed += await conn("attachments").where({ id: r.id, state: "pending" }).del();
    } catch {
      kept += 1;
    }
  }
  return { removed, kept };
}

// --------------------------------------------------------------------------- a survey's files

/** The stored files of a survey, oldest first (none if the user may not see it). */
export async function listSurveyAttachments(
  conn: Db,
  user: SessionUser,
  survey: Pick<Survey, "id" | "editable">,
): Promise<AttachmentView[]> {
  const rows = await conn("attachments as a")
    .join("users as u", "u.id", "a.uploaded_by")
    .where({ "a.submission_id": survey.id, "a.state": "stored" })
    .whereIn("a.submission_id", readableSurveys(conn, user))
    .orderBy([{ column: "a.created_at" }, { column: "a.id" }])
    .select(viewColumns);
  return rows.map((r) => toView(r, mayRemove(user, r.uploaded_by_organisation_id, !survey.editable)));
}

const surveyLocked = (s: Pick<Survey, "reference" | "status">) =>
  new UploadProblem(
    409,
    `Survey ${s.reference} is ${s.status}; its files can no longer change. Ask the owner's engineer to return it if something is missing.`,
  );

/** Waits for a submit of the survey to finish, so the "still open" check that follows cannot race with it. */
async function lockSurvey(trx: Knex.Transaction, submissionId: string): Promise<void> {
  await trx("submissions").where({ id: submissionId, kind: "thickness" }).forUpdate().first("id");
}

/**
 * Checks, stores and records one file of a survey still open (draft or returned), as
 * `uploadAttachment` does for a coupon: pending row first, then the objects, then stored
 * with its audit event. The survey sheet is a PDF (or a photo of it), photos are JPEG, PNG
 * or WebP (with a thumbnail), and the instrument's export is CSV text of at most 5 MB.
 */
export async function uploadSurveyAttachment(
  conn: Knex,
  user: SessionUser,
  submissionId: string,
  file: ReceivedFile,
  kind: SurveyAttachmentKind,
  requestId?: string,
): Promise<AttachmentView> {
  file = { ...file, name: cleanFileName(file.name) };
  const survey = await getSurvey(conn, user, submissionId); // 404 for others, 403 for owner staff
  if (!survey.editable) throw surveyLocked(survey);
  if (file.byteSize === 0) throw new UploadProblem(400, `“${file.name}” is empty (0 bytes). Choose the file again.`);
  const type = kind === "instrument_export" ? await identifyCsvExport(file) : await identify(file, kind);
  const thumbnail =
    type.contentType === "application/pdf" || type.contentType === "text/csv" ? null : await makeThumbnail(file, type);
  const id = randomUUID();
  const keys = surveyAttachmentKeys(survey.ownerId, survey.id, id);
  const row = {
    id,
    owner_id: survey.ownerId,
    submission_id: survey.id,
    kind,
    content_type: type.contentType,
    byte_size: file.byteSize,
    sha256: file.sha256,
    object_key: keys.original,
    thumbnail_key: thumbnail ? keys.thumbnail : null,
    original_name: file.name,
    state: "pending",
    uploaded_by: user.id,
    uploaded_by_organisation_id: user.organisation.id,
  };
  await conn("attachments").insert(row);
  const mayExist = await storeOrAbandon(conn, id, [
    { key: keys.original, body: file as StoredObject["body"], contentType: type.contentType, sha256: file.sha256 },
    ...(thumbnail
      ? [{ key: keys.thumbnail, body: thumbnail, contentType: "image/jpeg", sha256: sha256Hex(thumbnail) }]
      : []),
  ]);
  try {
    return await conn.transaction(async (trx) => {
      await lockSurvey(trx, survey.id);
      const now = await getSurvey(trx, user, survey.id);
      if (!now.editable) throw surveyLocked(now);
      const stored = await trx("attachments")
        .where({ id, state: "pending" })
        .update({ state: "stored" })
        .returning("created_at");
      if (stored.length === 0) throw storeDown();
      await recordAudit(trx, {
        ownerId: survey.ownerId,
        actor: actorOf(user),
        action: "attachment.uploaded",
        recordType: "submission",
        recordId: survey.id,
        after: {
          attachment: id,
          survey: survey.reference,
          kind,
          name: file.name,
          content_type: type.contentType,
          byte_size: file.byteSize,
          sha256: file.sha256,
        },
        requestId,
      });
      return toView({ ...row, created_at: stored[0].created_at, uploaded_by_name: user.name }, true);
    });
  } catch (error) {
    await abandon(conn, id, mayExist);
    throw error;
  }
}

/** Removes a file of a survey still open; only the contractor that attached it. Audited, as removeAttachment. */
export async function removeSurveyAttachment(
  conn: Knex,
  user: SessionUser,
  submissionId: string,
  attachmentId: string,
  requestId?: string,
): Promise<void> {
  const keys = await conn.transaction(async (trx) => {
    const first = await getSurvey(trx, user, submissionId);
    await lockSurvey(trx, first.id);
    const survey = await getSurvey(trx, user, first.id);
    const row = await trx("attachments")
      .where({ id: attachmentId, submission_id: survey.id, state: "stored" })
      .forUpdate()
      .first(
        "id",
        "kind",
        "original_name",
        "content_type",
        "byte_size",
        "sha256",
        "object_key",
        "thumbnail_key",
        "uploaded_by_organisation_id",
      );
    if (!row) throw new NotFound("file on this survey");
    if (row.uploaded_by_organisation_id !== user.organisation.id)
      throw new Forbidden("Only the contractor that attached a file can remove it.");
    if (!survey.editable) throw surveyLocked(survey);
    await trx("attachments").where({ id: attachmentId }).update({ state: "pending" });
    await recordAudit(trx, {
      ownerId: survey.ownerId,
      actor: actorOf(user),
      action: "attachment.removed",
      recordType: "submission",
      recordId: survey.id,
      before: {
        attachment: row.id,
        survey: survey.reference,
        kind: row.kind,
        name: row.original_name,
        content_type: row.content_type,
        byte_size: row.byte_size,
        sha256: row.sha256,
      },
      requestId,
    });
    return [row.object_key as string, ...(row.thumbnail_key ? [row.thumbnail_key as string] : [])];
  });
  await abandon(conn, attachmentId, keys);
}
