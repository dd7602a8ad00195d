import { Column, CreateDateColumn, Entity, PrimaryGeneratedColumn, UpdateDateColumn } from 'typeorm';

@Entity('scores')
export class Score {
  @PrimaryGeneratedColumn('uuid')
  id: string;

  @Column({ type: 'varchar', length: 160, unique: true })
  name: string;

  @Column({ name: 'outcome_definition', type: 'text' })
  outcomeDefinition: string;

  @Column({ name: 'time_horizon', type: 'varchar', length: 120 })
  timeHorizon: string;

  @Column({ name: 'intended_population', type: 'text' })
  intendedPopulation: string;

  @Column({ type: 'text' })
  citation: string;

  @Column({ type: 'varchar', length: 200, nullable: true })
  doi: string | null;

  @Column({ name: 'caution_text', type: 'text' })
  cautionText: string;

  @Column({ name: 'created_by', type: 'uuid', nullable: true })
  createdBy: string | null;

  @CreateDateColumn({ name: 'created_at', type: 'timestamptz' })
  createdAt: Date;

  @UpdateDateColumn({ name: 'updated_at', type: 'timestamptz' })
  updatedAt: Date;
}
