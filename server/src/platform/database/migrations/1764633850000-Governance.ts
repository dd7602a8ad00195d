import type { MigrationInterface, QueryRunner } from 'typeorm';

/** Statistician reviews, chair signatures (21 CFR Part 11 style), run comments and the e-mail outbox. */
export class Governance1764633850000 implements MigrationInterface {
  name = 'Governance1764633850000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE run_reviews (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        run_id uuid NOT NULL REFERENCES validation_runs(id),
        verdict varchar(30) NOT NULL CHECK (verdict IN ('fit for use', 'recalibrate first', 'not fit for use')),
        reasoning text NOT NULL CHECK (length(btrim(reasoning)) > 0),
        reviewer_id uuid NOT NULL REFERENCES users(id),
        created_at timestamptz NOT NULL DEFAULT now(),
        -- Deferred so the old review can point at its successor inside the same transaction.
        superseded_by uuid REFERENCES run_reviews(id) DEFERRABLE INITIALLY DEFERRED,
        CHECK (superseded_by IS DISTINCT FROM id)
      )`);
    await q.query(`CREATE UNIQUE INDEX run_reviews_one_current ON run_reviews (run_id) WHERE superseded_by IS NULL`);
    // Append-only, except that a current review may be linked once to the review that supersedes it.
    await q.query(`
      CREATE FUNCTION plumbline_review_guard() RETURNS trigger LANGUAGE plpgsql AS $$
      BEGIN
        IF TG_OP = 'DELETE' THEN
          RAISE EXCEPTION 'plumbline: DELETE on run_reviews is not allowed (append-only record)' USING ERRCODE = 'P0001';
        END IF;
        IF OLD.superseded_by IS NOT NULL OR NEW.superseded_by IS NULL
            OR NEW.id IS DISTINCT FROM OLD.id OR NEW.run_id IS DISTINCT FROM OLD.run_id
            OR NEW.verdict IS DISTINCT FROM OLD.verdict OR NEW.reasoning IS DISTINCT FROM OLD.reasoning
            OR NEW.reviewer_id IS DISTINCT FROM OLD.reviewer_id OR NEW.created_at IS DISTINCT FROM OLD.created_at THEN
          RAISE EXCEPTION 'plumbline: a review is immutable; only its superseded_by link may be set, once' USING ERRCODE = 'P0001';
        END IF;
        RETURN NEW;
      END $$`);
    await q.query(`
      CREATE TRIGGER run_reviews_guard BEFORE UPDATE OR DELETE ON run_reviews
      FOR EACH ROW EXECUTE FUNCTION plumbline_review_guard()`);

    await q.query(`
      CREATE TABLE signatures (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        run_id uuid NOT NULL REFERENCES validation_runs(id),
        score_version_id uuid NOT NULL REFERENCES score_versions(id),
        review_id uuid REFERENCES run_reviews(id),
        signer_id uuid NOT NULL REFERENCES users(id),
        printed_name varchar(120) NOT NULL,
        role varchar(20) NOT NULL,
        meaning varchar(40) NOT NULL CHECK (meaning IN ('approve for clinical use', 'return to statistician', 'revoke approval')),
        reason text,
        signed_at timestamptz NOT NULL,
        record_sha256 char(64) NOT NULL,
        revokes_signature_id uuid REFERENCES signatures(id),
        CHECK (meaning = 'approve for clinical use' OR length(btrim(coalesce(reason, ''))) > 0),
        CHECK ((meaning = 'revoke approval') = (revokes_signature_id IS NOT NULL)),
        CHECK (meaning = 'revoke approval' OR review_id IS NOT NULL)
      )`);
    // One decision per review: of two chairs signing at once, the second insert fails here.
    await q.query(`
      CREATE UNIQUE INDEX signatures_one_decision ON signatures (review_id)
      WHERE meaning IN ('approve for clinical use', 'return to statistician')`);
    await q.query(
      `CREATE UNIQUE INDEX signatures_one_revocation ON signatures (revokes_signature_id) WHERE revokes_signature_id IS NOT NULL`,
    );
    await q.query(`CREATE INDEX signatures_run_idx ON signatures (run_id)`);
    await q.query(`
      CREATE TRIGGER signatures_immutable BEFORE UPDATE OR DELETE ON signatures
      FOR EACH ROW EXECUTE FUNCTION plumbline_refuse_change()`);

    await q.query(`
      CREATE TABLE run_comments (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        run_id uuid NOT NULL REFERENCES validation_runs(id),
        author_id uuid NOT NULL REFERENCES users(id),
        body text NOT NULL CHECK (length(btrim(body)) > 0),
        created_at timestamptz NOT NULL DEFAULT now()
      )`);
    await q.query(`CREATE INDEX run_comments_run_idx ON run_comments (run_id, created_at)`);
    await q.query(`
      CREATE TRIGGER run_comments_append_only BEFORE UPDATE OR DELETE ON run_comments
      FOR EACH ROW EXECUTE FUNCTION plumbline_refuse_change()`);

    await q.query(`
      CREATE TABLE email_outbox (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        recipients text[] NOT NULL,
        subject varchar(300) NOT NULL,
        text text NOT NULL,
        kind varchar(60) NOT NULL,
        status varchar(10) NOT NULL DEFAULT 'pending' CHECK (status IN ('pending', 'sent', 'failed')),
        attempts integer NOT NULL DEFAULT 0,
        last_error text,
        next_attempt_at timestamptz NOT NULL DEFAULT now(),
        created_at timestamptz NOT NULL DEFAULT now(),
        sent_at timestamptz
      )`);
    await q.query(`CREATE INDEX email_outbox_due_idx ON email_outbox (next_attempt_at) WHERE status = 'pending'`);
  }

  async down(q: QueryRunner): Promise<void> {
    for (const t of ['email_outbox', 'run_comments', 'signatures', 'run_reviews']) await q.query(`DROP TABLE ${t}`);
    await q.query('DROP FUNCTION plumbline_review_guard');
  }
}
