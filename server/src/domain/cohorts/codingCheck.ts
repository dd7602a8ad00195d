// What the score expects of each mapped column (transform, indicator levels, unit, plausible range), and the coding
// check after the row pass: an indicator column whose level never occurs, or that holds labels the formula does not
// name, stops the upload until the steward maps those labels or goes back (a mismatch gives wrong risks silently).
import type { CodingIssue, ColumnMappingSpec, ColumnSummary, RequiredPredictorView } from '@shared/cohorts';
import type { ScoreModel } from '@shared/model';
import type { ScoreVersion } from '../../platform/database/entities/ScoreVersion';
import { isAgeHeader } from './deidentify';
import { requiredPredictors } from './uploadMapping';

/** The plausible range the row checks apply to a predictor (uploadCheck.ts uses the same defaults). */
export function plausibleRange(
  column: string,
  fileColumn: string | undefined,
  mapping: ColumnMappingSpec | null,
  supplied: boolean,
) {
  const set = mapping?.ranges?.[column] ?? {};
  const age = /^age/i.test(column) || (fileColumn ? isAgeHeader(fileColumn) : false);
  return { min: set.min ?? (age || supplied ? 0 : null), max: set.max ?? (age ? 120 : supplied ? 1 : null) };
}

export function predictorViews(
  sv: Pick<ScoreVersion, 'mode' | 'model' | 'probabilityColumn'>,
  mapping: ColumnMappingSpec | null,
): RequiredPredictorView[] {
  const terms = sv.mode === 'formula' ? (sv.model as ScoreModel).predictors : [];
  return requiredPredictors(sv).map((p) => {
    const mine = terms.filter((t) => t.column === p.column);
    return {
      ...p,
      transforms: sv.mode === 'supplied' ? ['supplied probability'] : [...new Set(mine.map((t) => t.transform))],
      levels: [
        ...new Set(mine.filter((t) => t.transform === 'indicator' && t.level !== undefined).map((t) => t.level!)),
      ],
      unit: mine.find((t) => t.unit)?.unit ?? null,
      range:
        p.kind === 'numeric'
          ? plausibleRange(p.column, mapping?.predictors[p.column], mapping, sv.mode === 'supplied')
          : { min: null, max: null },
    };
  });
}

const quoted = (xs: string[]) => xs.map((x) => `"${x}"`).join(', ');

/**
 * Indicator columns whose checked labels do not fit the formula: a level that never occurs, a label that differs from
 * a level only by case or spaces, or more than one label the formula does not name (only one can be the "otherwise").
 * Labels the steward confirmed (mapping.labels) count as named.
 */
export function codingIssues(
  predictors: RequiredPredictorView[],
  mapping: ColumnMappingSpec | null,
  summary: Record<string, ColumnSummary>,
): CodingIssue[] {
  if (!mapping) return [];
  const out: CodingIssue[] = [];
  for (const p of predictors) {
    if (!p.levels.length || p.kind !== 'text') continue;
    const s = summary[p.column];
    if (!s || s.kind !== 'categorical') continue;
    const confirmed = mapping.labels?.[p.column] ?? {};
    const found = s.levels;
    const absent = p.levels.filter((l) => !found.some((f) => f.value === l && f.count > 0));
    const unnamed = found.filter((f) => !p.levels.includes(f.value) && !(f.value in confirmed));
    const near = unnamed.filter((f) => p.levels.some((l) => l.trim().toLowerCase() === f.value.trim().toLowerCase()));
    if (!absent.length && !near.length && unnamed.length <= 1) continue;
    const held = found
      .slice(0, 8)
      .map((f) => `"${f.value}" (${f.count})`)
      .join(', ');
    const why = absent.length
      ? `the formula's level ${quoted(absent)} never occurs`
      : near.length
        ? `${quoted(near.map((f) => f.value))} differs from the formula's level ${quoted(p.levels)} only by case or spaces`
        : `it holds ${unnamed.length} labels the formula does not name`;
    out.push({
      predictor: p.column,
      fileColumn: mapping.predictors[p.column] ?? p.column,
      levels: p.levels,
      absent,
      unnamed,
      message: `${p.column}: ${why}; the column holds ${held}. Map these labels to the formula's level ${quoted(p.levels)}, or go back and choose another column.`,
    });
  }
  return out;
}
