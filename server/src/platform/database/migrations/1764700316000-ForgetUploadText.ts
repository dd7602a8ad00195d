import type { MigrationInterface, QueryRunner } from 'typeorm';

/**
 * Uploads kept before the de-identification fixes: a ragged row's stored text is blanked (only its line number and
 * reason stay), discarded and refused uploads forget what was summarised from their cells, and the plain-file flag
 * goes (every file is read by the one parser now, domain/cohorts/csvFile.ts).
 */
export class ForgetUploadText1764700316000 implements MigrationInterface {
  name = 'ForgetUploadText1764700316000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`UPDATE cohort_upload_rejections SET value = '' WHERE column_name = '(row)' AND value <> ''`);
    await q.query(
      `DELETE FROM cohort_upload_rejections r USING cohort_uploads u WHERE u.id = r.upload_id AND u.status IN ('discarded', 'refused')`,
    );
    await q.query(`UPDATE cohort_uploads SET column_summary = '{}', event_period = NULL, rejection_counts = '[]', suggested_mapping = NULL
                   WHERE status IN ('discarded', 'refused')`);
    await q.query('ALTER TABLE cohort_uploads DROP COLUMN plain_text');
  }

  async down(q: QueryRunner): Promise<void> {
    // The forgotten text cannot come back; only the column does.
    await q.query('ALTER TABLE cohort_uploads ADD COLUMN plain_text boolean');
  }
}
