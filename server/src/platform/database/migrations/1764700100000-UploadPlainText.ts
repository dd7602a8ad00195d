import type { MigrationInterface, QueryRunner } from 'typeorm';

/**
 * Whether a received file has no quote and no CR outside a CRLF, found while it is received (server/src/http/routes/cohorts.ts)
 * so the row checks need not read the whole file once more to find out. NULL for uploads received before: found out then.
 */
export class UploadPlainText1764700100000 implements MigrationInterface {
  name = 'UploadPlainText1764700100000';

  async up(q: QueryRunner): Promise<void> {
    await q.query('ALTER TABLE cohort_uploads ADD COLUMN plain_text boolean');
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query('ALTER TABLE cohort_uploads DROP COLUMN plain_text');
  }
}
