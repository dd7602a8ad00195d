import { Column, CreateDateColumn, Entity, PrimaryGeneratedColumn } from 'typeorm';

export type AlertRuleKind = 'citl-consecutive' | 'cusum' | 'oe-limit' | 'auc-below';

/** A drift rule a statistician sets for a score; evaluated after each completed run and on demand. */
@Entity('alert_rules')
export class AlertRule {
  @PrimaryGeneratedColumn('uuid')
  id: string;

  @Column({ name: 'score_id', type: 'uuid' })
  scoreId: string;

  @Column({ type: 'varchar', length: 30 })
  kind: AlertRuleKind;

  @Column({ type: 'jsonb', default: {} })
  params: Record<string, unknown>;

  @Column({ type: 'boolean', default: true })
  enabled: boolean;

  @Column({ name: 'created_by', type: 'uuid', nullable: true })
  createdBy: string | null;

  @CreateDateColumn({ name: 'created_at', type: 'timestamptz' })
  createdAt: Date;
}
