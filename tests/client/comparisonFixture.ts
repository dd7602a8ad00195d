// A completed score comparison for client tests: the engine's own comparison (domain/comparisons/comparisonCompute.ts)
// of two invented supplied-risk scores on the same invented patients.
import { scoreComparisonSettingsSchema, type CompletedScoreComparison } from '@shared/scoreComparison';
import { computeComparison } from '../../server/src/domain/comparisons/comparisonCompute';
import { mulberry32 } from '../../server/src/stats/bootstrap';
import { cohort } from '../reference/tools';

const { p, y } = cohort(3000, 23);
// The second score: the first one's logit blurred by noise, so it ranks patients less well.
const rnd = mulberry32(5);
const blurred = Array.from(p, (x) => {
  const lp = Math.log(x / (1 - x)) + 0.9 * (rnd() - 0.5) * 2;
  return 1 / (1 + Math.exp(-lp));
});

export function comparisonOf(replicates: number): CompletedScoreComparison {
  const settings = scoreComparisonSettingsSchema.parse({ bootstrapReplicates: replicates, bootstrapSeed: 9 });
  const results = computeComparison({
    first: { mode: 'supplied', model: null, probabilityColumn: 'risk_a' },
    second: { mode: 'supplied', model: null, probabilityColumn: 'risk_b' },
    data: {
      cohortVersionId: 'c',
      n: p.length,
      outcome: y,
      lineNo: Int32Array.from(p, (_, i) => i + 2),
      columns: { risk_a: Array.from(p), risk_b: blurred },
      eventDate: [],
      subgroups: {},
    },
    settings,
  });
  const side = (name: string, id: string) => ({ scoreVersionId: id, scoreId: id, scoreName: name, version: 1 });
  return {
    id: 'cmp',
    first: side('Heron index', 'a'),
    second: side('Plover score', 'b'),
    cohortId: 'c',
    cohortName: 'Invented ward',
    cohortVersionId: 'cv',
    cohortVersion: 1,
    cohortLabel: '',
    status: 'completed',
    progress: 1,
    error: null,
    engineVersion: results.engineVersion,
    createdBy: null,
    createdByName: null,
    createdAt: '2026-01-01T00:00:00.000Z',
    completedAt: '2026-01-01T00:01:00.000Z',
    headline: { n: results.n, aucDifference: results.auc.difference.estimate, pValue: results.auc.pValue },
    settings,
    results,
    inputsSha256: 'a'.repeat(64),
    resultsSha256: 'b'.repeat(64),
  };
}
