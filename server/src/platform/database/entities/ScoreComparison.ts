import { Column, CreateDateColumn, Entity, PrimaryGeneratedColumn } from 'typeorm';
import type { ScoreComparisonResults, ScoreComparisonSettings } from '@shared/scoreComparison';

/** Two score versions on the same patients of one cohort version; stored once computed, never changed (trigger). */
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

  @Column({ type: 'jsonb' })
  results: ScoreComparisonResults;

  @Column({ name: 'engine_version', type: 'varchar', length: 40 })
  engineVersion: string;

  @Column({ name: 'inputs_sha256', type: 'char', length: 64 })
  inputsSha256: string;

  @Column({ name: 'results_sha256', type: 'char', length: 64 })
  resultsSha256: string;

  @Column({ name: 'created_by', type: 'uuid', nullable: true })
  createdBy: string | null;

  @CreateDateColumn({ name: 'created_at', type: 'timestamptz' })
  createdAt: Date;
}
