import { Column, CreateDateColumn, Entity, PrimaryGeneratedColumn } from 'typeorm';

/** A named series of uploads (e.g. one unit's quarterly extracts); each upload is a CohortVersion. */
@Entity('cohorts')
export class Cohort {
  @PrimaryGeneratedColumn('uuid')
  id: string;

  @Column({ type: 'varchar', length: 160, unique: true })
  name: string;

  @Column({ type: 'text', default: '' })
  description: string;

  @Column({ name: 'score_id', type: 'uuid', nullable: true })
  scoreId: string | null;

  @Column({ name: 'created_by', type: 'uuid', nullable: true })
  createdBy: string | null;

  @CreateDateColumn({ name: 'created_at', type: 'timestamptz' })
  createdAt: Date;
}
