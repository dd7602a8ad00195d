import { Column, CreateDateColumn, Entity, PrimaryGeneratedColumn } from 'typeorm';
import type { RunResults, RunSettings, RunStatus } from '@shared/runs';

/** One validation run: a queued job while it waits or runs, an immutable record once completed (database trigger). */
@Entity('validation_runs')
export class ValidationRun {
  @PrimaryGeneratedColumn('uuid')
  id: string;

  @Column({ name: 'score_version_id', type: 'uuid' })
  scoreVersionId: string;

  @Column({ name: 'cohort_version_id', type: 'uuid' })
  cohortVersionId: string;

  @Column({ type: 'jsonb' })
  settings: RunSettings;

  @Column({ type: 'varchar', length: 20, default: 'queued' })
  status: RunStatus;

  @Column({ type: 'real', default: 0 })
  progress: number;

  @Column({ name: 'progress_message', type: 'text', nullable: true })
  progressMessage: string | null;

  @Column({ type: 'text', nullable: true })
  error: string | null;

  @Column({ type: 'jsonb', nullable: true })
  results: RunResults | null;

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

  @Column({ name: 'started_at', type: 'timestamptz', nullable: true })
  startedAt: Date | null;

  @Column({ name: 'finished_at', type: 'timestamptz', nullable: true })
  finishedAt: Date | null;

  @Column({ type: 'integer', default: 1 })
  attempt: number;
}
