import { Column, Entity, PrimaryGeneratedColumn } from 'typeorm';
import type { SignatureMeaning } from '@shared/governance';

/** An electronic signature on a run's record; the database refuses any change (21 CFR 11.50, 11.70). */
@Entity('signatures')
export class Signature {
  @PrimaryGeneratedColumn('uuid')
  id: string;

  @Column({ name: 'run_id', type: 'uuid' })
  runId: string;

  @Column({ name: 'score_version_id', type: 'uuid' })
  scoreVersionId: string;

  @Column({ name: 'review_id', type: 'uuid', nullable: true })
  reviewId: string | null;

  @Column({ name: 'signer_id', type: 'uuid' })
  signerId: string;

  @Column({ name: 'printed_name', type: 'varchar', length: 120 })
  printedName: string;

  @Column({ type: 'varchar', length: 20 })
  role: string;

  @Column({ type: 'varchar', length: 40 })
  meaning: SignatureMeaning;

  @Column({ type: 'text', nullable: true })
  reason: string | null;

  @Column({ name: 'signed_at', type: 'timestamptz' })
  signedAt: Date;

  @Column({ name: 'record_sha256', type: 'char', length: 64 })
  recordSha256: string;

  @Column({ name: 'revokes_signature_id', type: 'uuid', nullable: true })
  revokesSignatureId: string | null;
}
