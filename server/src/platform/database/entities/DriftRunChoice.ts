import { Column, Entity, PrimaryColumn } from 'typeorm';

/** The run a statistician chose to stand for a cohort version on a score version's drift timeline (null: the newest). */
@Entity('drift_run_choices')
export class DriftRunChoice {
  @PrimaryColumn({ name: 'score_version_id', type: 'uuid' })
  scoreVersionId: string;

  @PrimaryColumn({ name: 'cohort_version_id', type: 'uuid' })
  cohortVersionId: string;

  @Column({ name: 'run_id', type: 'uuid', nullable: true })
  runId: string | null;

  @Column({ name: 'chosen_by', type: 'uuid' })
  chosenBy: string;

  @Column({ name: 'chosen_at', type: 'timestamptz', default: () => 'now()' })
  chosenAt: Date;
}
