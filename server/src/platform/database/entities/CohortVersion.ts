import type { MissingnessSummary } from '@shared/missingness';
import { Column, CreateDateColumn, Entity, PrimaryGeneratedColumn } from 'typeorm';

/** One immutable upload: its accepted rows live in cohort_row_blocks (streamed in by COPY during the check, read by runs). */
@Entity('cohort_versions')
export class CohortVersion {
  @PrimaryGeneratedColumn('uuid')
  id: string;

  @Column({ name: 'cohort_id', type: 'uuid' })
  cohortId: string;

  @Column({ type: 'integer' })
  version: number;

  @Column({ type: 'varchar', length: 160, default: '' })
  label: string;

  @Column({ name: 'period_start', type: 'date', nullable: true })
  periodStart: string | null;

  @Column({ name: 'period_end', type: 'date', nullable: true })
  periodEnd: string | null;

  @Column({ name: 'source_filename', type: 'varchar', length: 255 })
  sourceFilename: string;

  @Column({ name: 'source_sha256', type: 'char', length: 64 })
  sourceSha256: string;

  @Column({ name: 'source_bytes', type: 'bigint' })
  sourceBytes: string;

  @Column({ name: 'row_count', type: 'integer' })
  rowCount: number;

  @Column({ type: 'integer' })
  events: number;

  @Column({ name: 'excluded_count', type: 'integer', default: 0 })
  excludedCount: number;

  @Column({ type: 'jsonb', default: [] })
  exclusions: unknown[];

  @Column({ type: 'jsonb' })
  mapping: Record<string, unknown>;

  @Column({ name: 'column_summary', type: 'jsonb', default: {} })
  columnSummary: Record<string, unknown>;

  /** Missing values per column, subgroup level and period, and the predictors missing together; null before it was kept. */
  @Column({ type: 'jsonb', nullable: true })
  missingness: MissingnessSummary | null;

  @Column({ name: 'uploaded_by', type: 'uuid', nullable: true })
  uploadedBy: string | null;

  @CreateDateColumn({ name: 'created_at', type: 'timestamptz' })
  createdAt: Date;
}
