/**
 * Performance within each level of a grouping column (subgroups for fairness, or sites), then either a test of
 * heterogeneity across the levels (subgroups) or a random-effects meta-analysis (sites).
 * Every per-level figure is the engine's own single-cohort result on that level's rows (fullSet.ts), so a level's
 * AUC, calibration-in-the-large, slope, O/E and smoothed calibration curve equal `validate` on the subset exactly (the
 * curve on as many grid points as the whole cohort's, so a stored run grows by at most gridSize points a level);
 * ICI's 95% CI is the seeded percentile bootstrap of bootstrap.ts on the subset (iciInterval: the full bootstrap's ICI interval, computed alone).
 * Levels below the published minimum events (shared/src/adequacy.ts: Vergouwe et al. 2005) are flagged, not dropped.
 * Heterogeneity across subgroup levels: Cochran's Q under a fixed effect (metaAnalysis.ts) for calibration-in-the-large
 * and log O/E. Sites: REML random effects for logit AUC, calibration-in-the-large, calibration slope and log O/E with
 * τ², I² and the Riley et al. 2011 prediction interval, on the scales of Debray TPA et al. (2017) BMJ 356:i6460.
 * Choices: a blank group value is its own level, "(blank)"; a level the engine refuses (e.g. no events) is kept with
 * the reason and left out of the pooled analyses; a level enters a pooled analysis of a metric when that metric and a
 * positive SE are estimable there.
 */
import type { ValidationResult, ValidationSettings } from '@shared/validation';
import { adequacyVerdict } from '@shared/adequacy';
import type { LevelPerformance, PooledAnalysis, PooledMetric, SiteAnalysis, SubgroupAnalysis } from '@shared/subgroups';
import { iciInterval } from './bootstrap';
import { EngineInputError } from './checkInputs';
import { computeFullSet, resolveSettings } from './fullSet';
import { heterogeneityTest, randomEffectsReml } from './metaAnalysis';
import { oeFromCounts } from './observedExpected';

export type { LevelPerformance, PooledAnalysis, PooledMetric, SiteAnalysis, SubgroupAnalysis } from '@shared/subgroups';

export const BLANK_LEVEL = '(blank)';

export function levelEffect(l: LevelPerformance, metric: PooledMetric): { estimate: number; se: number } | null {
  let e: { estimate: number; se: number } | null = null;
  if (metric === 'logitAuc' && l.auc) {
    const a = l.auc.estimate;
    e = { estimate: Math.log(a / (1 - a)), se: l.auc.se / (a * (1 - a)) }; // delta method (Debray et al. 2017)
  } else if (metric === 'calibrationIntercept' && l.calibrationIntercept)
    e = { estimate: l.calibrationIntercept.estimate, se: l.calibrationIntercept.se };
  else if (metric === 'calibrationSlope' && l.calibrationSlope)
    e = { estimate: l.calibrationSlope.estimate, se: l.calibrationSlope.se };
  else if (metric === 'logOe' && l.oe) e = { estimate: Math.log(l.oe.estimate), se: l.oe.seLog };
  return e && Number.isFinite(e.estimate) && Number.isFinite(e.se) && e.se > 0 ? e : null;
}

function levelsOf(groups: ArrayLike<string>): Map<string, number[]> {
  const rows = new Map<string, number[]>();
  for (let i = 0; i < groups.length; i++) {
    const g = groups[i].trim() === '' ? BLANK_LEVEL : groups[i].trim();
    let list = rows.get(g);
    if (!list) rows.set(g, (list = []));
    list.push(i);
  }
  return new Map([...rows.entries()].sort(([a], [b]) => a.localeCompare(b, 'en', { numeric: true })));
}

/** One level's figures from the engine's full result on its rows (and, if asked, the bootstrap of its ICI). */
export function levelFromResult(level: string, r: ValidationResult): LevelPerformance {
  const verdict = adequacyVerdict(r.events, r.nonEvents);
  const oe = oeFromCounts(r.oe.observed, r.oe.expected, r.n);
  const fit = (f: ValidationResult['calibrationIntercept']) =>
    f.converged ? { estimate: f.estimate, lower: f.lower, upper: f.upper, se: f.se } : null;
  const iciCi = r.bootstrap?.intervals.ici;
  return {
    level,
    n: r.n,
    events: r.events,
    nonEvents: r.nonEvents,
    adequacy: verdict.level,
    belowMinimum: !verdict.meetsMinimum,
    error: null,
    auc: { ...r.auc },
    calibrationIntercept: fit(r.calibrationIntercept),
    calibrationSlope: fit(r.calibrationSlope),
    oe: { estimate: r.oe.estimate, lower: r.oe.lower, upper: r.oe.upper, seLog: oe.seLog },
    ici: { estimate: r.ici, lower: iciCi?.lower ?? NaN, upper: iciCi?.upper ?? NaN },
    calibrationCurve: r.calibrationCurve.smoothed,
  };
}

/**
 * Figures for each level of `groups` (one label per row). `settings.bootstrapReplicates` > 0 gives ICI its CI,
 * seeded by `settings.bootstrapSeed` (the same seed for every level: each level's resamples are its own rows).
 */
export function performanceByLevel(
  p: Float64Array,
  y: Uint8Array,
  groups: ArrayLike<string>,
  settings: Partial<ValidationSettings> = {},
): LevelPerformance[] {
  if (groups.length !== p.length || y.length !== p.length)
    throw new RangeError('risks, outcomes and group labels differ in length');
  const s = resolveSettings(settings);
  const out: LevelPerformance[] = [];
  for (const [level, idx] of levelsOf(groups)) {
    const lp = Float64Array.from(idx, (i) => p[i]);
    const ly = Uint8Array.from(idx, (i) => y[i]);
    let r: ValidationResult;
    try {
      r = computeFullSet(lp, ly, s);
    } catch (e) {
      if (!(e instanceof EngineInputError)) throw e;
      let events = 0;
      for (const v of ly) events += v;
      const verdict = adequacyVerdict(events, ly.length - events);
      out.push({
        level,
        n: ly.length,
        events,
        nonEvents: ly.length - events,
        adequacy: verdict.level,
        belowMinimum: !verdict.meetsMinimum,
        error: e.message,
        auc: null,
        calibrationIntercept: null,
        calibrationSlope: null,
        oe: null,
        ici: null,
        calibrationCurve: null,
      });
      continue;
    }
    const row = levelFromResult(level, r);
    if (s.bootstrapReplicates > 0) {
      const iv = iciInterval(lp, ly, s, r.ici);
      row.ici = { estimate: r.ici, lower: iv.lower, upper: iv.upper };
    }
    out.push(row);
  }
  return out;
}

function pooled<T>(
  levels: LevelPerformance[],
  metric: PooledMetric,
  minLevels: number,
  analyse: (y: number[], se: number[]) => T,
): PooledAnalysis<T> {
  const used: string[] = [];
  const excluded: { level: string; reason: string }[] = [];
  const y: number[] = [];
  const se: number[] = [];
  for (const l of levels) {
    const e = levelEffect(l, metric);
    if (!e) {
      excluded.push({ level: l.level, reason: l.error ?? 'not estimable in this level' });
      continue;
    }
    used.push(l.level);
    y.push(e.estimate);
    se.push(e.se);
  }
  return { levels: used, excluded, result: y.length >= minLevels ? analyse(y, se) : null };
}

/** Subgroups (fairness): per-level figures and Cochran's Q across levels for calibration-in-the-large and log O/E. */
export function subgroupAnalysis(
  p: Float64Array,
  y: Uint8Array,
  groups: ArrayLike<string>,
  settings: Partial<ValidationSettings> = {},
): SubgroupAnalysis {
  const levels = performanceByLevel(p, y, groups, settings);
  return {
    levels,
    heterogeneity: {
      calibrationIntercept: pooled(levels, 'calibrationIntercept', 2, heterogeneityTest),
      logOe: pooled(levels, 'logOe', 2, heterogeneityTest),
    },
  };
}

const expit = (x: number) => 1 / (1 + Math.exp(-x));
const back: Record<PooledMetric, (x: number) => number> = {
  logitAuc: expit,
  calibrationIntercept: (x) => x,
  calibrationSlope: (x) => x,
  logOe: Math.exp,
};

/** Sites: per-site figures and a REML random-effects meta-analysis of each metric (at least 2 sites to pool). */
export function siteAnalysis(
  p: Float64Array,
  y: Uint8Array,
  sites: ArrayLike<string>,
  settings: Partial<ValidationSettings> = {},
): SiteAnalysis {
  const levels = performanceByLevel(p, y, sites, settings);
  const one = (metric: PooledMetric) =>
    pooled(levels, metric, 2, (ys, ses) => {
      const r = randomEffectsReml(ys, ses);
      const f = back[metric];
      return {
        ...r,
        natural: {
          estimate: f(r.estimate),
          lower: f(r.lower),
          upper: f(r.upper),
          predictionLower: f(r.predictionInterval.lower),
          predictionUpper: f(r.predictionInterval.upper),
        },
      };
    });
  return {
    levels,
    pooled: {
      logitAuc: one('logitAuc'),
      calibrationIntercept: one('calibrationIntercept'),
      calibrationSlope: one('calibrationSlope'),
      logOe: one('logOe'),
    },
  };
}
