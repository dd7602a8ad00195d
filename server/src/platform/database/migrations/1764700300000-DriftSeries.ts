import type { MigrationInterface, QueryRunner } from 'typeorm';

/**
 * The per-patient drift series of a (score version, cohort version): predicted risk and outcome in event-date order,
 * worked out once in the run's worker thread when the run completes (domain/drift/driftSeries.ts), so the drift page and
 * the drift rules only merge stored series instead of loading and sorting every cohort on the API thread. Both inputs
 * are immutable, so a series never changes (plumbline_refuse_change) and any run of the pair may write it first.
 * p is float8 little-endian and y one byte per patient; `dates`/`counts` give the date groups in order (NULL last).
 */
export class DriftSeries1764700300000 implements MigrationInterface {
  name = 'DriftSeries1764700300000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE drift_series (
        score_version_id uuid NOT NULL REFERENCES score_versions(id),
        cohort_version_id uuid NOT NULL REFERENCES cohort_versions(id),
        run_id uuid REFERENCES validation_runs(id),
        n integer NOT NULL CHECK (n >= 0),
        variance double precision NOT NULL,
        dates text[] NOT NULL,
        counts integer[] NOT NULL,
        p bytea NOT NULL,
        y bytea NOT NULL,
        created_at timestamptz NOT NULL DEFAULT now(),
        PRIMARY KEY (score_version_id, cohort_version_id),
        CHECK (octet_length(p) = 8 * n AND octet_length(y) = n AND cardinality(dates) = cardinality(counts))
      )`);
    await q.query(
      `CREATE TRIGGER drift_series_immutable BEFORE UPDATE OR DELETE ON drift_series FOR EACH ROW EXECUTE FUNCTION plumbline_refuse_change()`,
    );
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query('DROP TABLE drift_series');
  }
}
