import { Column, CreateDateColumn, Entity, PrimaryGeneratedColumn } from 'typeorm';
import type { Verdict } from '@shared/governance';

/** A statistician's verdict on one completed run; append-only, a revision supersedes it. */
@Entity('run_reviews')
export class RunReview {
  @PrimaryGeneratedColumn('uuid')
  id: string;

  @Column({ name: 'run_id', type: 'uuid' })
  runId: string;

  @Column({ type: 'varchar', length: 30 })
  verdict: Verdict;

  @Column({ type: 'text' })
  reasoning: string;

  @Column({ name: 'reviewer_id', type: 'uuid' })
  reviewerId: string;

  @CreateDateColumn({ name: 'created_at', type: 'timestamptz' })
  createdAt: Date;

  @Column({ name: 'superseded_by', type: 'uuid', nullable: true })
  supersededBy: string | null;

  /** The score comparison this review relied on, if the statistician named one. */
  @Column({ name: 'comparison_id', type: 'uuid', nullable: true })
  comparisonId: string | null;
}
