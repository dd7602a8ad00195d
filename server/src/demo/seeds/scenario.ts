// The invented demo scenario's registry records. Everything here is fictional: the hospital, the score, its
// authors, its journal and its coefficients were made up for the demo.
import type { ScoreModel } from '@shared/model';
import { Score } from '../../platform/database/entities/Score';
import { createScore, createScoreVersion } from '../../domain/scores/scores';
import { dataSource } from '../../platform/database/dataSource';

// --- the Kestrel score -------------------------------------------------------------------------

export const KESTREL_SCORE = {
  name: 'Kestrel 30-day Readmission Score',
  outcomeDefinition: 'Unplanned readmission to any ward of the hospital within 30 days of discharge.',
  timeHorizon: '30 days after discharge',
  intendedPopulation: 'Adults (18 years and over) discharged alive from medical wards.',
  citation:
    'Arkwright P, Nandi S (2021). The Kestrel score for 30-day readmission. Journal of Invented Hospital Medicine 4:112–120 (fictional citation for the demo).',
  doi: null,
  cautionText:
    'Invented demo score. The Kestrel score estimates the chance of an unplanned readmission within 30 days; it was built on adults ' +
    'discharged from medical wards and says nothing about surgical, obstetric or paediatric patients. Use it alongside clinical judgement, never instead of it.',
};

/** Version 1, as (fictionally) published: logit p = −3.6 + 0.012·age + 0.35·ln LOS + 0.28·prior + 0.45·[emergency] + 0.11·Charlson. */
export const KESTREL_V1_MODEL: ScoreModel = {
  intercept: -3.6,
  predictors: [
    { column: 'age', coefficient: 0.012, transform: 'linear' },
    { column: 'length_of_stay', coefficient: 0.35, transform: 'log' },
    { column: 'prior_admissions', coefficient: 0.28, transform: 'linear' },
    { column: 'emergency_admission', coefficient: 0.45, transform: 'indicator', level: 'yes' },
    { column: 'charlson_index', coefficient: 0.11, transform: 'linear' },
  ],
};

/** Version 2: the (fictional) erratum corrected the prior-admissions coefficient from 0.28 to 0.26. */
export const KESTREL_V2_MODEL: ScoreModel = {
  ...KESTREL_V1_MODEL,
  predictors: KESTREL_V1_MODEL.predictors.map((p) =>
    p.column === 'prior_admissions' ? { ...p, coefficient: 0.26 } : p,
  ),
};

const KESTREL_VERSIONS = [
  { model: KESTREL_V1_MODEL, changeNote: 'As published (Arkwright & Nandi 2021, fictional).' },
  {
    model: KESTREL_V2_MODEL,
    changeNote: 'Erratum (fictional, 2022): prior_admissions coefficient corrected from 0.28 to 0.26.',
  },
];

/** Registers the Kestrel score and its versions 1 and 2 through the registry service. Idempotent. */
export async function seedKestrelScore(): Promise<Score> {
  const [statistician]: { id: string; email: string }[] = await dataSource.query(
    `SELECT id, email FROM users WHERE email = 'statistician@demo.test'`,
  );
  if (!statistician)
    throw new Error('seedKestrelScore: the demo statistician account is missing; seed the accounts first');
  const repo = dataSource.getRepository(Score);
  let score = await repo.findOne({ where: { name: KESTREL_SCORE.name } });
  if (!score) {
    await createScore(statistician, KESTREL_SCORE, 'seed');
    score = (await repo.findOne({ where: { name: KESTREL_SCORE.name } }))!;
  }
  const [{ n }]: { n: number }[] = await dataSource.query(
    'SELECT count(*)::int AS n FROM score_versions WHERE score_id = $1',
    [score.id],
  );
  for (const v of KESTREL_VERSIONS.slice(n)) {
    await createScoreVersion(statistician, score.id, { mode: 'formula', ...v }, 'seed');
  }
  return score;
}
