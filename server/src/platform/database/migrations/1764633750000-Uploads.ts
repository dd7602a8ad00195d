import type { MigrationInterface, QueryRunner } from 'typeorm';

/** Pending cohort uploads (pollable progress) and the rejected rows a steward reviews before storing. */
export class Uploads1764633750000 implements MigrationInterface {
  name = 'Uploads1764633750000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE cohort_uploads (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        status varchar(20) NOT NULL DEFAULT 'pending'
          CHECK (status IN ('pending', 'processing', 'checked', 'committed', 'failed', 'refused', 'discarded')),
        cohort_id uuid REFERENCES cohorts(id),
        cohort_name varchar(160),
        score_version_id uuid NOT NULL REFERENCES score_versions(id),
        label varchar(160) NOT NULL DEFAULT '',
        period_start date,
        period_end date,
        source_filename varchar(255) NOT NULL,
        temp_path text,
        prepared_path text,
        sha256 char(64) NOT NULL,
        bytes bigint NOT NULL,
        delimiter varchar(1) NOT NULL DEFAULT ',',
        headers jsonb NOT NULL DEFAULT '[]'::jsonb,
        warnings jsonb NOT NULL DEFAULT '[]'::jsonb,
        suggested_mapping jsonb,
        mapping jsonb,
        progress double precision NOT NULL DEFAULT 0,
        rows_read integer NOT NULL DEFAULT 0,
        rows_accepted integer NOT NULL DEFAULT 0,
        rows_rejected integer NOT NULL DEFAULT 0,
        events integer NOT NULL DEFAULT 0,
        rejection_counts jsonb NOT NULL DEFAULT '[]'::jsonb,
        column_summary jsonb NOT NULL DEFAULT '{}'::jsonb,
        event_period jsonb,
        planned_version_id uuid,
        cohort_version_id uuid REFERENCES cohort_versions(id),
        error text,
        created_by uuid REFERENCES users(id),
        created_at timestamptz NOT NULL DEFAULT now(),
        updated_at timestamptz NOT NULL DEFAULT now(),
        CHECK (cohort_id IS NOT NULL OR cohort_name IS NOT NULL)
      )`);
    await q.query('CREATE INDEX cohort_uploads_created_by ON cohort_uploads (created_by, created_at DESC)');
    await q.query(`
      CREATE TABLE cohort_upload_rejections (
        upload_id uuid NOT NULL REFERENCES cohort_uploads(id) ON DELETE CASCADE,
        line_no integer NOT NULL,
        column_name text NOT NULL,
        value text NOT NULL,
        reason text NOT NULL
      )`);
    await q.query('CREATE INDEX cohort_upload_rejections_line ON cohort_upload_rejections (upload_id, line_no)');
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query('DROP TABLE cohort_upload_rejections');
    await q.query('DROP TABLE cohort_uploads');
  }
}
