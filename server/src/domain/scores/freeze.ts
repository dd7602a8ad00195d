// A score version's formula is frozen from the moment a result rests on it (a run or a score comparison); the
// score_versions trigger keeps it so. The first freeze is audited, once, whoever wins a race to it.
import type { EntityManager } from 'typeorm';
import { ScoreVersion } from '../../platform/database/entities/ScoreVersion';
import type { AuthUser } from '../accounts/actor';
import { appendAudit } from '../accounts/audit';

export async function freezeScoreVersion(
  m: EntityManager,
  sv: { id: string; locked: boolean },
  actor: AuthUser,
  ip: string | null,
  reason: string,
): Promise<void> {
  if (sv.locked) return;
  const { affected } = await m.getRepository(ScoreVersion).update({ id: sv.id, locked: false }, { locked: true });
  if (affected !== 1) return;
  await appendAudit(
    {
      actorId: actor.id,
      actorEmail: actor.email,
      action: 'score_version.locked',
      targetType: 'score_version',
      targetId: sv.id,
      sourceIp: ip,
      details: { reason },
    },
    m,
  );
}
