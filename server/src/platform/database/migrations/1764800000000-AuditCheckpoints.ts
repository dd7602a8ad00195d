import type { MigrationInterface, QueryRunner } from 'typeorm';

/**
 * Checkpoints of the audit chain's head: every audit write also records (seq, hash) of the entry it appended, in a
 * table the runtime role may only INSERT into. Deleting the newest entries then leaves checkpoints without their
 * entries, which /api/audit/verify reports (the hash chain alone cannot see a shortened tail).
 */
export class AuditCheckpoints1764800000000 implements MigrationInterface {
  name = 'AuditCheckpoints1764800000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE audit_checkpoints (
        seq bigint PRIMARY KEY,
        hash char(64) NOT NULL,
        recorded_at timestamptz NOT NULL DEFAULT now()
      )`);
    await q.query(`
      CREATE TRIGGER audit_checkpoints_append_only BEFORE UPDATE OR DELETE ON audit_checkpoints
      FOR EACH ROW EXECUTE FUNCTION plumbline_refuse_change()`);
    // The head as it stands now: entries written before this migration are covered from here on.
    await q.query(
      `INSERT INTO audit_checkpoints (seq, hash) SELECT seq, hash FROM audit_log ORDER BY seq DESC LIMIT 1`,
    );
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query('DROP TABLE audit_checkpoints');
  }
}
