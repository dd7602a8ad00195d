import type { MigrationInterface, QueryRunner } from 'typeorm';

export class Foundation1764633600000 implements MigrationInterface {
  name = 'Foundation1764633600000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE users (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        email varchar(254) NOT NULL UNIQUE,
        name varchar(120) NOT NULL,
        role varchar(20) NOT NULL CHECK (role IN ('admin','steward','statistician','chair','clinician')),
        active boolean NOT NULL DEFAULT true,
        password_hash varchar(100) NOT NULL,
        failed_logins integer NOT NULL DEFAULT 0,
        locked_until timestamptz,
        token_version integer NOT NULL DEFAULT 0,
        created_at timestamptz NOT NULL DEFAULT now(),
        updated_at timestamptz NOT NULL DEFAULT now()
      )`);
    await q.query(`
      CREATE TABLE audit_log (
        seq bigserial PRIMARY KEY,
        at timestamptz NOT NULL,
        actor_id uuid,
        actor_email varchar(254),
        action varchar(80) NOT NULL,
        target_type varchar(60),
        target_id varchar(120),
        source_ip varchar(64),
        details jsonb NOT NULL DEFAULT '{}'::jsonb,
        prev_hash char(64) NOT NULL,
        hash char(64) NOT NULL UNIQUE
      )`);
    await q.query(`CREATE INDEX audit_log_action_idx ON audit_log (action)`);
    await q.query(`CREATE INDEX audit_log_at_idx ON audit_log (at)`);
    // 21 CFR 11.10(e): the trail never obscures earlier entries, so the database refuses edits.
    await q.query(`
      CREATE FUNCTION plumbline_refuse_change() RETURNS trigger LANGUAGE plpgsql AS $$
      BEGIN
        RAISE EXCEPTION 'plumbline: % on % is not allowed (append-only record)', TG_OP, TG_TABLE_NAME
          USING ERRCODE = 'P0001';
      END $$`);
    await q.query(`
      CREATE TRIGGER audit_log_append_only BEFORE UPDATE OR DELETE ON audit_log
      FOR EACH ROW EXECUTE FUNCTION plumbline_refuse_change()`);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query(`DROP TABLE audit_log`);
    await q.query(`DROP FUNCTION plumbline_refuse_change`);
    await q.query(`DROP TABLE users`);
  }
}
