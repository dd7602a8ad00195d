import type { MigrationInterface, QueryRunner } from 'typeorm';

/** Drift monitoring: alert rules per score and the alerts they raise per score version (acknowledged once). */
export class Drift1764633900000 implements MigrationInterface {
  name = 'Drift1764633900000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE alert_rules (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        score_id uuid NOT NULL REFERENCES scores(id),
        kind varchar(30) NOT NULL CHECK (kind IN ('citl-consecutive', 'cusum', 'oe-limit', 'auc-below')),
        params jsonb NOT NULL DEFAULT '{}'::jsonb,
        enabled boolean NOT NULL DEFAULT true,
        created_by uuid REFERENCES users(id),
        created_at timestamptz NOT NULL DEFAULT now()
      )`);
    await q.query(`
      CREATE TABLE drift_alerts (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        score_version_id uuid NOT NULL REFERENCES score_versions(id),
        rule_id uuid NOT NULL REFERENCES alert_rules(id),
        period varchar(40) NOT NULL,
        detail jsonb NOT NULL DEFAULT '{}'::jsonb,
        raised_at timestamptz NOT NULL DEFAULT now(),
        acknowledged_by uuid REFERENCES users(id),
        acknowledged_at timestamptz,
        ack_note text,
        UNIQUE (score_version_id, rule_id, period),
        CHECK ((acknowledged_by IS NULL) = (acknowledged_at IS NULL))
      )`);
    // Acknowledge once: the acknowledgement columns may go from empty to set, never change afterwards.
    await q.query(`
      CREATE FUNCTION plumbline_drift_alert_guard() RETURNS trigger LANGUAGE plpgsql AS $$
      BEGIN
        IF TG_OP = 'DELETE' THEN RAISE EXCEPTION 'plumbline: alerts are kept on the record' USING ERRCODE = 'P0001'; END IF;
        IF OLD.acknowledged_at IS NOT NULL OR NEW.score_version_id IS DISTINCT FROM OLD.score_version_id
            OR NEW.rule_id IS DISTINCT FROM OLD.rule_id OR NEW.period IS DISTINCT FROM OLD.period
            OR NEW.detail IS DISTINCT FROM OLD.detail OR NEW.raised_at IS DISTINCT FROM OLD.raised_at THEN
          RAISE EXCEPTION 'plumbline: alert % is already acknowledged or its content is immutable', OLD.id USING ERRCODE = 'P0001';
        END IF;
        RETURN NEW;
      END $$`);
    await q.query(
      `CREATE TRIGGER drift_alerts_guard BEFORE UPDATE OR DELETE ON drift_alerts FOR EACH ROW EXECUTE FUNCTION plumbline_drift_alert_guard()`,
    );
    await q.query('CREATE INDEX drift_alerts_open ON drift_alerts (raised_at DESC) WHERE acknowledged_at IS NULL');
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query('DROP TABLE drift_alerts');
    await q.query('DROP TABLE alert_rules');
    await q.query('DROP FUNCTION plumbline_drift_alert_guard');
  }
}
