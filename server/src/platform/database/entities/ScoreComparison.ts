import { Column, CreateDateColumn, Entity, PrimaryGeneratedColumn } from 'typeorm';
import type { ScoreComparisonResults, ScoreComparisonSettings, ScoreComparisonStatus } from '@shared/scoreComparison';

/**
 * Two score versions on the same patients of one cohort version. Stored queued; its job moves it forward to completed
 * (results and hashes) or failed (error), after which it never changes (trigger, migration 1765000027000-ComparisonJobs).
 */
@Entity('score_comparisons')
export class ScoreComparison {
  @PrimaryGeneratedColumn('uuid')
  id: string;

  @Column({ name: 'first_score_version_id', type: 'uuid' })
  firstScoreVersionId: string;

  @Column({ name: 'second_score_version_id', type: 'uuid' })
  secondScoreVersionId: string;

  @Column({ name: 'cohort_version_id', type: 'uuid' })
  cohortVersionId: string;

  @Column({ type: 'jsonb' })
  settings: ScoreComparisonSettings;

  @Column({ type: 'varchar', length: 20, default: 'queued' })
  status: ScoreComparisonStatus;

  @Column({ type: 'real', default: 0 })
  progress: number;

  @Column({ type: 'text', nullable: true })
  error: string | null;

  @Column({ type: 'jsonb', nullable: true })
  results: ScoreComparisonResults | null;

  @Column({ name: 'engine_version', type: 'varchar', length: 40, nullable: true })
  engineVersion: string | null;

  @Column({ name: 'inputs_sha256', type: 'char', length: 64, nullable: true })
  inputsSha256: string | null;

  @Column({ name: 'results_sha256', type: 'char', length: 64, nullable: true })
  resultsSha256: string | null;

  @Column({ name: 'created_by', type: 'uuid', nullable: true })
  createdBy: string | null;

  @CreateDateColumn({ name: 'created_at', type: 'timestamptz' })
  createdAt: Date;

  /** When it ended, completed or failed. */
  @Column({ name: 'completed_at', type: 'timestamptz', nullable: true })
  completedAt: Date | null;
}
