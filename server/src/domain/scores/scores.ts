// Score registry rules: score descriptions, numbered formula versions, and their freezing once a run uses them.
//
// Decision: a score version is never edited in place, locked or not. Every change of formula is a new row with the
// next number and a change note, so the version history is the record itself (not something rebuilt from the
// audit trail), and a run can never race an edit of the formula it is reading. `locked` marks that a run used the
// version; the database trigger then also refuses any change of its formula (see migration 1764633700000-Registry).
import { In, type EntityManager } from 'typeorm';
import type { ScoreModel } from '@shared/model';
import type {
  CreateScoreRequest,
  ScoreDto,
  ScoreSummaryDto,
  ScoreVersionDto,
  UpdateScoreRequest,
} from '@shared/scores';
import { changeNoteProblem, createScoreVersionRequest } from '@shared/scores';
import { dataSource } from '../../platform/database/dataSource';
import { Score } from '../../platform/database/entities/Score';
import { ScoreVersion } from '../../platform/database/entities/ScoreVersion';
import { User } from '../../platform/database/entities/User';
import type { AuthUser } from '../accounts/actor';
import { conflict, invalid, notFound, zodMessage } from '../errors';
import { appendAudit } from '../accounts/audit';

type Actor = Pick<AuthUser, 'id' | 'email'>;

export interface NewScoreVersion {
  mode: 'formula' | 'supplied';
  model?: ScoreModel | null;
  probabilityColumn?: string | null;
  changeNote?: string | null;
  /** Set by recalibration: the run the new formula was fitted on, and how. */
  derivedFromRunId?: string | null;
  derivation?: Record<string, unknown> | null;
}

const iso = (d: Date | string) => (d instanceof Date ? d.toISOString() : new Date(d).toISOString());

export function toScoreDto(s: Score): ScoreDto {
  return {
    id: s.id,
    name: s.name,
    outcomeDefinition: s.outcomeDefinition,
    timeHorizon: s.timeHorizon,
    intendedPopulation: s.intendedPopulation,
    citation: s.citation,
    doi: s.doi,
    cautionText: s.cautionText,
    createdBy: s.createdBy,
    createdAt: iso(s.createdAt),
    updatedAt: iso(s.updatedAt),
  };
}

export function toVersionDto(v: ScoreVersion, createdByName: string | null = null): ScoreVersionDto {
  return {
    id: v.id,
    scoreId: v.scoreId,
    version: v.version,
    mode: v.mode,
    model: v.model,
    probabilityColumn: v.probabilityColumn,
    changeNote: v.changeNote,
    derivedFromRunId: v.derivedFromRunId,
    derivation: v.derivation,
    locked: v.locked,
    clinicalStatus: v.clinicalStatus,
    approvedRunId: v.approvedRunId,
    createdBy: v.createdBy,
    createdByName,
    createdAt: iso(v.createdAt),
  };
}

const isUniqueViolation = (err: unknown) => (err as { code?: string })?.code === '23505';

// --- scores ------------------------------------------------------------------------------------

export async function listScores(): Promise<ScoreSummaryDto[]> {
  const scores = await dataSource.getRepository(Score).find({ order: { name: 'ASC' } });
  const stats: { score_id: string; n: string; latest: number | null; approved: number[] | null }[] = await dataSource
    .getRepository(ScoreVersion)
    .createQueryBuilder('sv')
    .select('sv.scoreId', 'score_id')
    .addSelect('count(*)::text', 'n')
    .addSelect('max(sv.version)', 'latest')
    .addSelect(`array_agg(sv.version ORDER BY sv.version) FILTER (WHERE sv.clinicalStatus = 'approved')`, 'approved')
    .groupBy('sv.scoreId')
    .getRawMany();
  const byScore = new Map(stats.map((r) => [r.score_id, r]));
  return scores.map((s) => {
    const r = byScore.get(s.id);
    return {
      ...toScoreDto(s),
      versionCount: r ? Number(r.n) : 0,
      latestVersion: r?.latest ?? null,
      approvedVersions: r?.approved ?? [],
    };
  });
}

export async function getScore(id: string, manager: EntityManager = dataSource.manager): Promise<Score> {
  const score = await manager.getRepository(Score).findOne({ where: { id } });
  if (!score) throw notFound('score');
  return score;
}

export async function createScore(actor: Actor, input: CreateScoreRequest, ip: string): Promise<ScoreDto> {
  try {
    return await dataSource.transaction(async (m) => {
      const score = m.create(Score, { ...input, doi: input.doi ?? null, createdBy: actor.id });
      await m.save(score);
      await appendAudit(
        {
          actorId: actor.id,
          actorEmail: actor.email,
          action: 'score.create',
          targetType: 'score',
          targetId: score.id,
          sourceIp: ip,
          details: { name: score.name },
        },
        m,
      );
      return toScoreDto(score);
    });
  } catch (err) {
    if (isUniqueViolation(err)) throw conflict(`a score named "${input.name}" already exists`);
    throw err;
  }
}

export async function updateScore(actor: Actor, id: string, change: UpdateScoreRequest, ip: string): Promise<ScoreDto> {
  try {
    return await dataSource.transaction(async (m) => {
      const score = await m.getRepository(Score).findOne({ where: { id }, lock: { mode: 'pessimistic_write' } });
      if (!score) throw notFound('score');
      const before: Record<string, unknown> = {};
      const after: Record<string, unknown> = {};
      for (const [key, value] of Object.entries(change) as [keyof UpdateScoreRequest, unknown][]) {
        if (value === undefined || score[key] === value) continue;
        before[key] = score[key];
        after[key] = value;
      }
      if (Object.keys(after).length === 0) return toScoreDto(score);
      Object.assign(score, after);
      await m.save(score);
      await appendAudit(
        {
          actorId: actor.id,
          actorEmail: actor.email,
          action: 'score.update',
          targetType: 'score',
          targetId: id,
          sourceIp: ip,
          details: { before, after },
        },
        m,
      );
      return toScoreDto(score);
    });
  } catch (err) {
    if (isUniqueViolation(err)) throw conflict(`a score named "${change.name}" already exists`);
    throw err;
  }
}

// --- versions ----------------------------------------------------------------------------------

async function withNames(rows: ScoreVersion[], manager: EntityManager): Promise<ScoreVersionDto[]> {
  const ids = [...new Set(rows.map((r) => r.createdBy).filter((x): x is string => !!x))];
  const names = new Map<string, string>();
  if (ids.length) {
    const users = await manager.getRepository(User).find({ select: { id: true, name: true }, where: { id: In(ids) } });
    for (const u of users) names.set(u.id, u.name);
  }
  return rows.map((r) => toVersionDto(r, r.createdBy ? (names.get(r.createdBy) ?? null) : null));
}

/** The version history of a score, newest first. */
export async function listScoreVersions(
  scoreId: string,
  manager: EntityManager = dataSource.manager,
): Promise<ScoreVersionDto[]> {
  await getScore(scoreId, manager);
  const rows = await manager.getRepository(ScoreVersion).find({ where: { scoreId }, order: { version: 'DESC' } });
  return withNames(rows, manager);
}

/** One version by its id (for runs and recalibration). */
export async function getScoreVersion(id: string, manager: EntityManager = dataSource.manager): Promise<ScoreVersion> {
  const v = await manager.getRepository(ScoreVersion).findOne({ where: { id } });
  if (!v) throw notFound('score version');
  return v;
}

/** One version by score and number (for the API). */
export async function getScoreVersionByNumber(
  scoreId: string,
  version: number,
  manager: EntityManager = dataSource.manager,
): Promise<ScoreVersion> {
  const v = await manager.getRepository(ScoreVersion).findOne({ where: { scoreId, version } });
  if (!v) throw notFound(`version ${version} of this score`);
  return v;
}

export async function scoreVersionDto(
  v: ScoreVersion,
  manager: EntityManager = dataSource.manager,
): Promise<ScoreVersionDto> {
  return (await withNames([v], manager))[0];
}

/**
 * Adds the next numbered version of a score. The score row is locked FOR UPDATE first, so two concurrent calls
 * queue up and cannot both take the same number. Runs inside `manager`'s transaction when one is given.
 */
export async function createScoreVersion(
  actor: Actor,
  scoreId: string,
  input: NewScoreVersion,
  ip: string,
  manager?: EntityManager,
): Promise<ScoreVersion> {
  // Callers inside the server (recalibration) get the same checks as the API.
  const parsed = createScoreVersionRequest.safeParse(
    input.mode === 'formula'
      ? { mode: 'formula', model: input.model, changeNote: input.changeNote ?? undefined }
      : { mode: 'supplied', probabilityColumn: input.probabilityColumn, changeNote: input.changeNote ?? undefined },
  );
  if (!parsed.success) throw invalid(`invalid score version: ${zodMessage(parsed.error)}`);
  const valid = parsed.data;

  const work = async (m: EntityManager) => {
    const locked = await m
      .getRepository(Score)
      .findOne({ select: { id: true }, where: { id: scoreId }, lock: { mode: 'pessimistic_write' } });
    if (!locked) throw notFound('score');
    const { next } = (await m
      .getRepository(ScoreVersion)
      .createQueryBuilder('sv')
      .select('coalesce(max(sv.version), 0) + 1', 'next')
      .where('sv.scoreId = :scoreId', { scoreId })
      .getRawOne<{ next: number }>())!;
    const problem = changeNoteProblem(next, valid.changeNote);
    if (problem) throw invalid(problem);
    const row = m.create(ScoreVersion, {
      scoreId,
      version: next,
      mode: valid.mode,
      model: valid.mode === 'formula' ? valid.model : null,
      probabilityColumn: valid.mode === 'supplied' ? valid.probabilityColumn : null,
      changeNote: valid.changeNote ?? '',
      derivedFromRunId: input.derivedFromRunId ?? null,
      derivation: input.derivation ?? null,
      createdBy: actor.id,
    });
    await m.save(row);
    await appendAudit(
      {
        actorId: actor.id,
        actorEmail: actor.email,
        action: 'score_version.create',
        targetType: 'score_version',
        targetId: row.id,
        sourceIp: ip,
        details: {
          scoreId,
          version: next,
          mode: row.mode,
          changeNote: row.changeNote,
          derivedFromRunId: row.derivedFromRunId,
        },
      },
      m,
    );
    return row;
  };
  return manager ? work(manager) : dataSource.transaction(work);
}

/**
 * Freezes a version because a run is about to use it (call inside the run's transaction). Idempotent; the trigger
 * makes the freeze permanent. The audit entry names the actor when the caller gives one.
 */
export async function lockScoreVersion(id: string, manager: EntityManager, actor?: Actor, ip?: string): Promise<void> {
  // One guarded statement: only the call that flips the flag writes the audit entry.
  const { raw }: { raw: { version: number; score_id: string }[] } = await manager
    .createQueryBuilder()
    .update(ScoreVersion)
    .set({ locked: true })
    .where('id = :id AND NOT locked', { id })
    .returning('version, score_id')
    .execute();
  const changed = raw[0];
  if (!changed) {
    await getScoreVersion(id, manager); // 404 when it does not exist; otherwise it was locked already
    return;
  }
  await appendAudit(
    {
      actorId: actor?.id ?? null,
      actorEmail: actor?.email ?? null,
      action: 'score_version.lock',
      targetType: 'score_version',
      targetId: id,
      sourceIp: ip ?? null,
      details: { scoreId: changed.score_id, version: changed.version },
    },
    manager,
  );
}

/**
 * The answer to any attempt to edit a version: versions are never edited in place. A locked one is also
 * frozen by the database, so the message says so.
 */
export async function refuseVersionEdit(scoreId: string, version: number): Promise<never> {
  const v = await getScoreVersionByNumber(scoreId, version);
  const { next } = (await dataSource
    .getRepository(ScoreVersion)
    .createQueryBuilder('sv')
    .select('max(sv.version) + 1', 'next')
    .where('sv.scoreId = :scoreId', { scoreId })
    .getRawOne<{ next: number }>())!;
  const why = v.locked
    ? `version ${version} is used by a validation run and is frozen`
    : `score versions are never edited in place`;
  throw conflict(`${why}; create a new version instead (it will be version ${next}, with a note of what changed)`, {
    locked: v.locked,
    nextVersion: next,
  });
}

/** The formula of a version as a --model file. */
export async function exportScoreModel(
  scoreId: string,
  version: number,
): Promise<{ score: Score; version: ScoreVersion; model: ScoreModel }> {
  const score = await getScore(scoreId);
  const v = await getScoreVersionByNumber(scoreId, version);
  if (v.mode !== 'formula' || !v.model) {
    throw conflict(
      `version ${version} uses a supplied probability column (${v.probabilityColumn}) and has no formula to export`,
    );
  }
  return { score, version: v, model: { intercept: v.model.intercept, predictors: v.model.predictors } };
}
