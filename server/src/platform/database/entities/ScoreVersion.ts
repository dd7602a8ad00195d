import { Column, CreateDateColumn, Entity, PrimaryGeneratedColumn } from 'typeorm';
import type { ScoreModel } from '@shared/model';

export type ScoreMode = 'formula' | 'supplied';
export type ClinicalStatus = 'not approved' | 'approved' | 'revoked';

/** One immutable formula of a score; the database freezes it once a run uses it (locked). */
@Entity('score_versions')
export class ScoreVersion {
  @PrimaryGeneratedColumn('uuid')
  id: string;

  @Column({ name: 'score_id', type: 'uuid' })
  scoreId: string;

  @Column({ type: 'integer' })
  version: number;

  @Column({ type: 'varchar', length: 20 })
  mode: ScoreMode;

  @Column({ type: 'jsonb', nullable: true })
  model: ScoreModel | null;

  @Column({ name: 'probability_column', type: 'varchar', length: 80, nullable: true })
  probabilityColumn: string | null;

  @Column({ name: 'change_note', type: 'text', default: '' })
  changeNote: string;

  /** Set when the version is a recalibration proposed from a run. */
  @Column({ name: 'derived_from_run_id', type: 'uuid', nullable: true })
  derivedFromRunId: string | null;

  @Column({ type: 'jsonb', nullable: true })
  derivation: Record<string, unknown> | null;

  @Column({ type: 'boolean', default: false })
  locked: boolean;

  @Column({ name: 'clinical_status', type: 'varchar', length: 20, default: 'not approved' })
  clinicalStatus: ClinicalStatus;

  @Column({ name: 'approved_run_id', type: 'uuid', nullable: true })
  approvedRunId: string | null;

  @Column({ name: 'created_by', type: 'uuid', nullable: true })
  createdBy: string | null;

  @CreateDateColumn({ name: 'created_at', type: 'timestamptz' })
  createdAt: Date;
}
