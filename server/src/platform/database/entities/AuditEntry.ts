import { Column, Entity, PrimaryGeneratedColumn } from 'typeorm';

@Entity('audit_log')
export class AuditEntry {
  @PrimaryGeneratedColumn({ type: 'bigint' })
  seq: string;

  @Column({ name: 'at', type: 'timestamptz' })
  at: Date;

  @Column({ name: 'actor_id', type: 'uuid', nullable: true })
  actorId: string | null;

  @Column({ name: 'actor_email', type: 'varchar', length: 254, nullable: true })
  actorEmail: string | null;

  @Column({ type: 'varchar', length: 80 })
  action: string;

  @Column({ name: 'target_type', type: 'varchar', length: 60, nullable: true })
  targetType: string | null;

  @Column({ name: 'target_id', type: 'varchar', length: 120, nullable: true })
  targetId: string | null;

  @Column({ name: 'source_ip', type: 'varchar', length: 64, nullable: true })
  sourceIp: string | null;

  @Column({ type: 'jsonb', default: {} })
  details: Record<string, unknown>;

  @Column({ name: 'prev_hash', type: 'char', length: 64 })
  prevHash: string;

  @Column({ type: 'char', length: 64 })
  hash: string;
}
