import type { Knex } from "knex";

/**
 * Attachments of a coupon pull (exposure): photos as removed, photos after cleaning,
 * and lab sheets. The bytes live in the object store under keys namespaced by owner;
 * this table holds what the app knows about them.
 *
 * A row is written as 'pending' before its object is uploaded and turned 'stored'
 * after, so an upload that fails or is cut off leaves a row the clean-up can find
 * (and delete together with any object it left behind). Only 'stored' rows are shown.
 */
export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable("attachments", (t) => {
    t.uuid("id").primary({ constraintName: "attachments_pkey" }).defaultTo(knex.raw("gen_random_uuid()"));
    t.uuid("owner_id")
      .notNullable()
      .references("id")
      .inTable("organisations")
      .onDelete("RESTRICT")
      .withKeyName("attachments_owner_fkey")
      .comment("the asset owner whose record this is; the object key starts with it");
    // RESTRICT: an exposure's objects must be removed from the store before the exposure can go.
    t.uuid("exposure_id")
      .notNullable()
      .references("id")
      .inTable("coupon_exposures")
      .onDelete("RESTRICT")
      .withKeyName("attachments_exposure_fkey");
    t.text("kind")
      .notNullable()
      .comment("as_removed / after_cleaning: photos of the coupon; lab_sheet: the lab's record");
    t.text("content_type")
      .notNullable()
      .comment("decided from the file's bytes, never from its name or the declared type");
    t.integer("byte_size").notNullable();
    t.text("sha256").notNullable().comment("hex SHA-256 of the original as received");
    t.text("object_key").notNullable();
    t.text("thumbnail_key").comment("a rotated, metadata-free JPEG; null for PDFs");
    t.text("original_name")
      .notNullable()
      .comment("the file name as the uploader's computer gave it (cleaned of paths)");
    t.text("state")
      .notNullable()
      .defaultTo("pending")
      .comment("pending: row written, object not yet confirmed in the store");
    t.uuid("uploaded_by")
      .notNullable()
      .references("id")
      .inTable("users")
      .onDelete("RESTRICT")
      .withKeyName("attachments_uploaded_by_fkey");
    t.uuid("uploaded_by_organisation_id")
      .notNullable()
      .references("id")
      .inTable("organisations")
      .onDelete("RESTRICT")
      .withKeyName("attachments_uploaded_by_organisation_fkey");
    t.timestamp("created_at", { useTz: true }).notNullable().defaultTo(knex.fn.now());

    t.unique(["object_key"], { indexName: "attachments_object_key_key" });
    t.check("kind in ('as_removed', 'after_cleaning', 'lab_sheet')", [], "attachments_kind_check");
    t.check(
      "content_type in ('image/jpeg', 'image/png', 'image/webp', 'application/pdf')",
      [],
      "attachments_content_type_check",
    );
    t.check("content_type <> 'application/pdf' or kind = 'lab_sheet'", [], "attachments_pdf_is_lab_sheet_check");
    t.check("byte_size > 0 and byte_size <= 20971520", [], "attachments_byte_size_check");
    t.check("sha256 ~ '^[0-9a-f]{64}$'", [], "attachments_sha256_check");
    t.check("state in ('pending', 'stored')", [], "attachments_state_check");
    t.check("length(original_name) between 1 and 255", [], "attachments_original_name_check");
    t.check(
      "object_key = 'owners/' || owner_id || '/exposures/' || exposure_id || '/' || id || '/original'",
      [],
      "attachments_object_key_check",
    );
    t.check(
      "(content_type = 'application/pdf' and thumbnail_key is null) or " +
        "(content_type <> 'application/pdf' and thumbnail_key = 'owners/' || owner_id || '/exposures/' || exposure_id || '/' || id || '/thumb.jpg')",
      [],
      "attachments_thumbnail_key_check",
    );
  });
  await knex.raw(
    "create index attachments_exposure_idx on attachments (exposure_id, created_at) where state = 'stored'",
  );
  await knex.raw("create index attachments_pending_idx on attachments (created_at) where state = 'pending'");
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.dropTableIfExists("attachments");
}
