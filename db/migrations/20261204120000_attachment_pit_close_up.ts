import type { Knex } from "knex";

/** A photo may also be filed as a close-up of a pit (beside as removed, after cleaning and the lab sheet). */
export async function up(knex: Knex): Promise<void> {
  await knex.raw("alter table attachments drop constraint attachments_kind_check");
  await knex.raw(
    "alter table attachments add constraint attachments_kind_check check (kind in ('as_removed', 'after_cleaning', 'pit_close_up', 'lab_sheet'))",
  );
  await knex.raw(
    "comment on column attachments.kind is 'as_removed / after_cleaning / pit_close_up: photos of the coupon; lab_sheet: the lab''s record'",
  );
}

export async function down(knex: Knex): Promise<void> {
  await knex.raw("update attachments set kind = 'after_cleaning' where kind = 'pit_close_up'");
  await knex.raw("alter table attachments drop constraint attachments_kind_check");
  await knex.raw(
    "alter table attachments add constraint attachments_kind_check check (kind in ('as_removed', 'after_cleaning', 'lab_sheet'))",
  );
  await knex.raw(
    "comment on column attachments.kind is 'as_removed / after_cleaning: photos of the coupon; lab_sheet: the lab''s record'",
  );
}
