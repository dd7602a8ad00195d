// The demo's competing score and a completed head-to-head comparison (invented): the fictional Wren Early Readmission
// Index, made up for the demo, on the newest demo quarter against Kestrel v2; the newest quarter's review is revised
// to name the comparison it relied on. Idempotent.
import type { ScoreModel } from '@shared/model';
import { formatCount } from '@shared/format';
import { aucComparisonSentence } from '@shared/comparison';
import { comparedName } from '@shared/scoreComparison';
import { createScore, createScoreVersion } from '../../domain/scores/scores';
import { createComparison, getCompletedComparison } from '../../domain/comparisons/comparisons';
import { computeComparison } from '../../domain/comparisons/comparisonCompute';
import { processNextComparison, type ComputeComparison } from '../../domain/comparisons/comparisonQueue';
import { loadComparisonInput } from '../../domain/comparisons/comparisonInput';
import { reviewRun } from '../../domain/governance/governance';
import { dataSource } from '../../platform/database/dataSource';
import { logger } from '../../platform/observability/log';
import { seedAccounts } from './accounts';
import { DEMO_COHORT_NAME, KESTREL_SCORE_NAME } from './cohorts';

export const WREN_SCORE = {
  name: 'Wren Early Readmission Index',
  outcomeDefinition: 'Unplanned readmission to any ward of the hospital within 30 days of discharge.',
  timeHorizon: '30 days after discharge',
  intendedPopulation: 'Adults discharged alive from medical wards.',
  citation:
    'Okonkwo L, Fairbairn T (2019). A short index for early readmission. Invented Review of Ward Practice 11:45–52 (fictional citation for the demo).',
  doi: null,
  cautionText:
    'Invented demo score. The Wren index was (fictionally) built on a smaller hospital; it uses the same five discharge items as ' +
    'the Kestrel score, weighted more on age. Use it alongside clinical judgement, never instead of it.',
};

/** Invented weights: logit p = −3.3 + 0.022·age + 0.03·LOS + 0.10·prior + 0.30·[emergency] + 0.05·Charlson. */
export const WREN_V1_MODEL: ScoreModel = {
  intercept: -3.3,
  predictors: [
    { column: 'age', coefficient: 0.022, transform: 'linear' },
    { column: 'length_of_stay', coefficient: 0.03, transform: 'linear' },
    { column: 'prior_admissions', coefficient: 0.1, transform: 'linear' },
    { column: 'emergency_admission', coefficient: 0.3, transform: 'indicator', level: 'yes' },
    { column: 'charlson_index', coefficient: 0.05, transform: 'linear' },
  ],
};

/** Registers the Wren index, compares Kestrel v2 with it on the newest demo quarter and names it in a revised review. */
export async function seedCompetingScore(): Promise<void> {
  const accounts = await seedAccounts();
  const statistician = accounts.statistician;
  let [wren]: { id: string }[] = await dataSource.query('SELECT id FROM scores WHERE name = $1', [WREN_SCORE.name]);
  if (!wren) {
    await createScore(statistician, WREN_SCORE, 'seed');
    [wren] = await dataSource.query('SELECT id FROM scores WHERE name = $1', [WREN_SCORE.name]);
    await createScoreVersion(
      statistician,
      wren.id,
      { mode: 'formula', model: WREN_V1_MODEL, changeNote: 'As published (Okonkwo & Fairbairn 2019, fictional).' },
      'seed',
    );
  }
  const [pair]: { kestrel: string; wren: string; cohort_version_id: string; run_id: string | null }[] =
    await dataSource.query(
      `SELECT k.id AS kestrel, w.id AS wren, cv.id AS cohort_version_id,
              (SELECT r.id FROM validation_runs r WHERE r.score_version_id = k.id AND r.cohort_version_id = cv.id
                 AND r.status = 'completed' ORDER BY r.created_at DESC LIMIT 1) AS run_id
       FROM score_versions k JOIN scores ks ON ks.id = k.score_id AND ks.name = $1 AND k.version = 2
       JOIN score_versions w ON w.score_id = $2 AND w.version = 1
       JOIN cohort_versions cv ON cv.cohort_id = (SELECT id FROM cohorts WHERE name = $3)
       ORDER BY cv.period_end DESC NULLS LAST, cv.version DESC LIMIT 1`,
      [KESTREL_SCORE_NAME, wren.id, DEMO_COHORT_NAME],
    );
  if (!pair) {
    logger.warn('seedCompetingScore: no demo quarter for Kestrel v2; the demo comparison is skipped');
    return;
  }
  const [done]: { id: string; status: string }[] = await dataSource.query(
    `SELECT id, status FROM score_comparisons WHERE first_score_version_id = $1 AND second_score_version_id = $2 AND cohort_version_id = $3
       AND status <> 'failed' ORDER BY created_at DESC LIMIT 1`,
    [pair.kestrel, pair.wren, pair.cohort_version_id],
  );
  if (done?.status === 'completed') return;
  const id =
    done?.id ??
    (
      await createComparison(
        statistician,
        {
          firstScoreVersionId: pair.kestrel,
          secondScoreVersionId: pair.wren,
          cohortVersionId: pair.cohort_version_id,
          settings: { bootstrapReplicates: 200, bootstrapSeed: 20_260_101 },
        },
        'seed',
      )
    ).id;
  // The seed starts no job workers: the waiting comparison jobs run here, through the same job handler, computed in
  // this thread rather than a worker thread, as the demo runs are (same function, same hashes).
  const here: ComputeComparison = async (input) => {
    const { input: loaded, inputsSha256 } = await loadComparisonInput(input);
    return { ok: true, results: computeComparison(loaded), inputsSha256 };
  };
  while (await processNextComparison(here));
  const comparison = await getCompletedComparison(id);
  const r = comparison.results;
  logger.info(
    `[seed] comparison: ${comparedName(comparison.first)} against ${comparedName(comparison.second)} on ${formatCount(r.n)} patients`,
  );
  if (!pair.run_id) return;
  const [current]: { verdict: 'fit for use' | 'recalibrate first' | 'not fit for use'; reasoning: string }[] =
    await dataSource.query('SELECT verdict, reasoning FROM run_reviews WHERE run_id = $1 AND superseded_by IS NULL', [
      pair.run_id,
    ]);
  if (!current) return;
  const names = { first: comparedName(comparison.first), second: comparedName(comparison.second) };
  await reviewRun(
    statistician,
    pair.run_id,
    {
      verdict: current.verdict,
      reasoning: `${current.reasoning}\nAgainst the alternative the committee asked about: ${aucComparisonSentence(names, r.auc.difference, r.auc.pValue)}`,
      comparisonId: comparison.id,
    },
    'seed',
  );
}
