import { Column, Entity, PrimaryGeneratedColumn } from 'typeorm';

/** One fired alert rule for a score version and period; acknowledged once (database trigger). */
@Entity('drift_alerts')
export class DriftAlert {
  @PrimaryGeneratedColumn('uuid')
  id: string;

  @Column({ name: 'score_version_id', type: 'uuid' })
  scoreVersionId: string;

  @Column({ name: 'rule_id', type: 'uuid' })
  ruleId: string;

  @Column({ type: 'varchar', length: 40 })
  period: string;

  @Column({ type: 'jsonb', default: {} })
  detail: Record<string, unknown>;

  @Column({ name: 'raised_at', type: 'timestamptz', default: () => 'now()' })
  raisedAt: Date;

  @Column({ name: 'acknowledged_by', type: 'uuid', nullable: true })
  acknowledgedBy: string | null;

  @Column({ name: 'acknowledged_at', type: 'timestamptz', nullable: true })
  acknowledgedAt: Date | null;

  @Column({ name: 'ack_note', type: 'text', nullable: true })
  ackNote: string | null;
}
