/**
 * Multiple imputation by chained equations (MICE, fully conditional specification): each column with gaps is imputed
 * in turn from a model on the outcome and every other column (their current values), for a set number of iterations;
 * m independent chains give m completed data sets.
 * Source: van Buuren S, Groothuis-Oudshoorn K (2011) mice: Multivariate Imputation by Chained Equations in R, J Stat
 * Softw 45(3):1–67 — §3 (the algorithm), mice's defaults m, maxit = 5, pmm for numeric, logreg for binary, polyreg for
 * unordered categorical columns; Moons KGM et al. (2006) J Clin Epidemiol 59:1092–1101 (the outcome belongs in the
 * imputation model).
 * Choices:
 *  - start values, as mice's initialize: each gap gets a value drawn at random from the column's observed values;
 *  - categorical columns enter the other columns' models as K − 1 indicators (level 0 the reference);
 *  - chain l draws from its own stream, mulberry32 seeded from (seed, l) as the bootstrap does (bootstrap.ts), so the
 *    m completed data sets are the same for the same seed however the chains are split across threads;
 *  - `extra` columns (subgroup, period…) must be complete: they inform the models and are not imputed.
 */
import { replicateStream } from './bootstrap';
import { categoricalImpute } from './categoricalImputation';
import { pmmImpute } from './predictiveMeanMatching';

export type ImputationKind = 'numeric' | 'binary' | 'categorical';

export interface ImputationColumn {
  name: string;
  kind: ImputationKind;
  /** NaN marks a gap; binary columns hold 0/1, categorical ones the level index 0 … levels−1 */
  values: Float64Array;
  /** categorical: number of levels */
  levels?: number;
}

export interface ImputationSettings {
  imputations: number;
  iterations: number;
  seed: number;
  /** PMM donor pool size d */
  donors: number;
}

export const defaultImputationSettings: ImputationSettings = {
  imputations: 20,
  iterations: 5,
  seed: 20260101,
  donors: 5,
};

export const IMPUTATION_METHOD =
  'chained equations (van Buuren & Groothuis-Oudshoorn 2011): predictive mean matching, type-1, d donors, for numeric columns; logistic regression with a parameter draw for binary; multinomial logistic with a parameter draw for categorical; outcome and every other column in each model';

export interface ImputationInput {
  outcome: Uint8Array;
  columns: ImputationColumn[];
  extra?: ImputationColumn[];
}

const levelsOf = (c: ImputationColumn) => (c.kind === 'categorical' ? (c.levels ?? 0) : c.kind === 'binary' ? 2 : 0);

/** The column as model covariates: itself, or K − 1 indicators for a categorical column. */
function encode(c: ImputationColumn, values: Float64Array): Float64Array[] {
  if (c.kind !== 'categorical') return [values];
  return Array.from({ length: levelsOf(c) - 1 }, (_, k) => Float64Array.from(values, (v) => (v === k + 1 ? 1 : 0)));
}

export function checkImputationInput(input: ImputationInput): void {
  const n = input.outcome.length;
  for (const c of [...input.columns, ...(input.extra ?? [])]) {
    if (c.values.length !== n) throw new Error(`column ${c.name} has ${c.values.length} values for ${n} rows`);
    if (c.kind === 'categorical' && !(levelsOf(c) >= 2))
      throw new Error(`categorical column ${c.name} needs at least 2 levels`);
    let observed = 0;
    for (let i = 0; i < n; i++) if (!Number.isNaN(c.values[i])) observed++;
    if (observed === 0) throw new Error(`column ${c.name} has no observed value to impute from`);
  }
  for (const c of input.extra ?? [])
    if (c.values.some(Number.isNaN))
      throw new Error(`extra column ${c.name} has gaps; extra columns of the imputation model must be complete`);
}

/** Completed columns of chain `imputation` (0-based), in the order of input.columns. */
export function imputeOnce(input: ImputationInput, settings: ImputationSettings, imputation: number): Float64Array[] {
  const rand = replicateStream(settings.seed, imputation);
  const n = input.outcome.length;
  const all = [...input.columns, ...(input.extra ?? [])];
  const observed = all.map((c) => Uint8Array.from(c.values, (v) => (Number.isNaN(v) ? 0 : 1)));
  const current = all.map((c) => Float64Array.from(c.values));
  current.forEach((col, j) => {
    if (observed[j].every((o) => o === 1)) return;
    const pool: number[] = [];
    for (let i = 0; i < n; i++) if (observed[j][i]) pool.push(col[i]);
    for (let i = 0; i < n; i++) if (!observed[j][i]) col[i] = pool[Math.floor(rand() * pool.length)];
  });
  const outcome = Float64Array.from(input.outcome);
  const encoded = all.map((c, j) => encode(c, current[j]));
  const withGaps = input.columns.map((_, j) => j).filter((j) => observed[j].some((o) => o === 0));
  const warm = all.map(() => ({}) as { start?: number[] });
  for (let it = 0; it < settings.iterations; it++) {
    for (const j of withGaps) {
      const design = [outcome, ...encoded.filter((_, k) => k !== j).flat()];
      const c = all[j];
      if (c.kind === 'numeric') pmmImpute(current[j], observed[j], design, rand, settings.donors);
      else categoricalImpute(current[j], observed[j], design, levelsOf(c), rand, warm[j]);
      encoded[j] = encode(c, current[j]);
    }
  }
  return current.slice(0, input.columns.length);
}

/** m completed data sets; `onImputation` hears of each finished chain. */
export function multipleImputation(
  input: ImputationInput,
  settings: ImputationSettings,
  onImputation?: (done: number) => void,
): Float64Array[][] {
  checkImputationInput(input);
  const out: Float64Array[][] = [];
  for (let l = 0; l < settings.imputations; l++) {
    out.push(imputeOnce(input, settings, l));
    onImputation?.(l + 1);
  }
  return out;
}
