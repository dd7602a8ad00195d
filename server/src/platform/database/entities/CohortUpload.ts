import { Column, CreateDateColumn, Entity, PrimaryGeneratedColumn, UpdateDateColumn } from 'typeorm';
import type { ColumnMappingSpec, ColumnSummary, ScreenFinding, UploadStatus } from '@shared/cohorts';
import type { PeriodKind } from '@shared/periods';
import type { MissingnessSummary } from '@shared/missingness';

/**
 * A received file on its way to a cohort version: screened, mapped, checked (by a job), then stored or discarded. Its
 * checked rows wait in cohort_row_blocks under planned_version_id; its rejected rows in cohort_upload_rejections.
 */
@Entity('cohort_uploads')
export class CohortUpload {
  @PrimaryGeneratedColumn('uuid')
  id: string;

  @Column({ type: 'varchar', length: 20, default: 'pending' })
  status: UploadStatus;

  @Column({ name: 'cohort_id', type: 'uuid', nullable: true })
  cohortId: string | null;

  @Column({ name: 'cohort_name', type: 'varchar', length: 160, nullable: true })
  cohortName: string | null;

  @Column({ name: 'score_version_id', type: 'uuid' })
  scoreVersionId: string;

  @Column({ type: 'varchar', length: 160, default: '' })
  label: string;

  @Column({ name: 'period_start', type: 'date', nullable: true })
  periodStart: string | null;

  @Column({ name: 'period_end', type: 'date', nullable: true })
  periodEnd: string | null;

  @Column({ name: 'source_filename', type: 'varchar', length: 255 })
  sourceFilename: string;

  /** The received file while it may still be checked or stored; null once stored, discarded or refused. */
  @Column({ name: 'temp_path', type: 'text', nullable: true })
  tempPath: string | null;

  @Column({ type: 'char', length: 64 })
  sha256: string;

  @Column({ type: 'bigint' })
  bytes: string;

  @Column({ type: 'varchar', length: 1, default: ',' })
  delimiter: ',' | ';';

  @Column({ type: 'jsonb', default: [] })
  headers: string[];

  @Column({ type: 'jsonb', default: [] })
  warnings: ScreenFinding[];

  @Column({ name: 'suggested_mapping', type: 'jsonb', nullable: true })
  suggestedMapping: ColumnMappingSpec | null;

  @Column({ type: 'jsonb', nullable: true })
  mapping: ColumnMappingSpec | null;

  @Column({ type: 'double precision', default: 0 })
  progress: number;

  @Column({ name: 'rows_read', type: 'integer', default: 0 })
  rowsRead: number;

  @Column({ name: 'rows_accepted', type: 'integer', default: 0 })
  rowsAccepted: number;

  @Column({ name: 'rows_rejected', type: 'integer', default: 0 })
  rowsRejected: number;

  @Column({ type: 'integer', default: 0 })
  events: number;

  @Column({ name: 'rejection_counts', type: 'jsonb', default: [] })
  rejectionCounts: { reason: string; count: number }[];

  @Column({ name: 'column_summary', type: 'jsonb', default: {} })
  columnSummary: Record<string, ColumnSummary>;

  @Column({ name: 'event_period', type: 'jsonb', nullable: true })
  eventPeriod: {
    min: string;
    max: string;
    end?: string;
    kind?: PeriodKind | null;
    labels?: Record<string, string> | null;
  } | null;

  /** Missing values of the checked rows (domain/cohorts/missingness.ts); null before the check. */
  @Column({ type: 'jsonb', nullable: true })
  missingness: MissingnessSummary | null;

  /** The id the cohort version will get when stored; the staged blocks carry it meanwhile. */
  @Column({ name: 'planned_version_id', type: 'uuid', nullable: true })
  plannedVersionId: string | null;

  @Column({ name: 'cohort_version_id', type: 'uuid', nullable: true })
  cohortVersionId: string | null;

  @Column({ type: 'text', nullable: true })
  error: string | null;

  @Column({ name: 'created_by', type: 'uuid', nullable: true })
  createdBy: string | null;

  @CreateDateColumn({ name: 'created_at', type: 'timestamptz' })
  createdAt: Date;

  @UpdateDateColumn({ name: 'updated_at', type: 'timestamptz' })
  updatedAt: Date;
}
