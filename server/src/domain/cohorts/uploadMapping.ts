// What a score version needs from a cohort file (its columns, a template header) and the first guess at a file's
// column mapping, shown to the steward before the rows are checked.
import type { ColumnMappingSpec } from '@shared/cohorts';
import { columnMapping } from '@shared/cohorts';
import type { ScoreModel } from '@shared/model';
import { dataSource } from '../../platform/database/dataSource';
import { Score } from '../../platform/database/entities/Score';
import { ScoreVersion } from '../../platform/database/entities/ScoreVersion';
import { toCsv } from '@shared/csv';
import type { RequiredPredictor } from './uploadCheck';

/** The columns a score version reads from a cohort, one entry per distinct column. */
export function requiredPredictors(
  sv: Pick<ScoreVersion, 'mode' | 'model' | 'probabilityColumn'>,
): RequiredPredictor[] {
  if (sv.mode === 'supplied') return [{ column: sv.probabilityColumn!, kind: 'numeric', positiveOnly: false }];
  const out = new Map<string, RequiredPredictor>();
  for (const p of (sv.model as ScoreModel).predictors) {
    const prev = out.get(p.column) ?? { column: p.column, kind: 'text' as const, positiveOnly: false };
    if (p.transform !== 'indicator') prev.kind = 'numeric';
    if (p.transform === 'log') prev.positiveOnly = true;
    out.set(p.column, prev);
  }
  return [...out.values()];
}

/** The header of a cohort file for a score version: its predictor columns, the outcome and the period (as suggestMapping reads them). */
export function cohortTemplateCsv(sv: Pick<ScoreVersion, 'mode' | 'model' | 'probabilityColumn'>): string {
  return toCsv([...requiredPredictors(sv).map((p) => p.column), 'outcome', 'period'], []);
}

const normName = (s: string) => s.toLowerCase().replace(/[^a-z0-9]/g, '');

/** A first guess the steward corrects: same names, usual outcome and period columns, usual subgroup names. */
export function suggestMapping(
  headers: string[],
  sample: string[][],
  required: RequiredPredictor[],
): ColumnMappingSpec {
  const byNorm = new Map(headers.map((h) => [normName(h), h]));
  const find = (...names: string[]) => {
    for (const n of names) if (byNorm.has(normName(n))) return byNorm.get(normName(n))!;
    return headers.find((h) => names.some((n) => normName(h).includes(normName(n))));
  };
  const predictors: Record<string, string> = {};
  for (const r of required) {
    const h = byNorm.get(normName(r.column)) ?? headers.find((x) => normName(x).includes(normName(r.column)));
    if (h) predictors[r.column] = h;
  }
  const outcomeCol =
    find('outcome', 'readmitted_30d', 'readmitted', 'readmission', 'event', 'died', 'death', 'y') ?? headers[0];
  const idx = headers.indexOf(outcomeCol);
  const levels = new Set(sample.map((r) => (r[idx] ?? '').trim().toLowerCase()).filter(Boolean));
  let positive = ['1'];
  let negative = ['0'];
  if ([...levels].some((l) => l === 'yes' || l === 'no')) [positive, negative] = [['yes'], ['no']];
  else if ([...levels].some((l) => l === 'true' || l === 'false')) [positive, negative] = [['true'], ['false']];
  const dateCol = headers.find((h) => /date|month|quarter|period/i.test(h));
  const subgroups: Record<string, string> = {};
  for (const [name, aliases] of [
    ['sex', ['sex', 'gender']],
    ['age_band', ['age_band', 'ageband', 'age_group']],
    ['unit', ['unit', 'ward']],
    ['site', ['site', 'campus']],
  ] as const) {
    const h = find(...aliases);
    if (h && !Object.values(predictors).includes(h)) subgroups[name] = h;
  }
  return columnMapping.parse({
    predictors,
    outcome: { column: outcomeCol, positive, negative },
    date: dateCol ? { column: dateCol } : null,
    subgroups,
  });
}

/** Score versions a cohort can be uploaded against (for the upload form's select). */
export async function scoreVersionChoices() {
  const rows: {
    id: string;
    scoreId: string;
    scoreName: string;
    version: number;
    mode: string;
    probability_column: string | null;
    model: ScoreModel | null;
  }[] = await dataSource
    .getRepository(ScoreVersion)
    .createQueryBuilder('sv')
    .innerJoin(Score, 's', 's.id = sv.scoreId')
    .select(['sv.id AS id', 's.id AS "scoreId"', 's.name AS "scoreName"', 'sv.version AS version', 'sv.mode AS mode'])
    .addSelect(['sv.probabilityColumn AS probability_column', 'sv.model AS model'])
    .orderBy('s.name')
    .addOrderBy('sv.version', 'DESC')
    .getRawMany();
  return rows.map((r) => ({
    id: r.id,
    scoreId: r.scoreId,
    scoreName: r.scoreName,
    version: r.version,
    mode: r.mode,
    requiredPredictors: requiredPredictors({
      mode: r.mode as 'formula',
      model: r.model,
      probabilityColumn: r.probability_column,
    }),
  }));
}
