// Plumbline command line: validate a cohort CSV with the same engine the server uses.
//   validate --csv FILE --outcome COL (--prediction COL | --model MODEL.json) [--thresholds 0.05,0.1] [--format json|table]
//            [--bootstrap N [--seed S]] [--group COL[,COL…]] [--site COL]
//            [--missing complete-case|mi [--imputations 20] [--iterations 5] [--seed N] [--imputation-columns A,B]]
import { readFileSync } from 'node:fs';
import { scoreModelSchema, type ScoreModel } from '@shared/model';
import type { Estimate, FitResult, ValidationResult } from '@shared/validation';
import { ADEQUACY_SOURCES, adequacyVerdict, MINIMUM_EACH } from '@shared/adequacy';
import {
  formatCount,
  formatEstimateShort,
  formatFigure,
  formatNumber,
  formatPercent,
  formatPValue,
  type Figure,
  type Interval,
} from '@shared/format';
import { EngineInputError, resolveSettings, validate } from '../stats/index';
import { calibrationBand } from '../stats/bootstrap';
import {
  siteAnalysis,
  subgroupAnalysis,
  type LevelPerformance,
  type SiteAnalysis,
  type SubgroupAnalysis,
} from '../stats/groupPerformance';
import { analyseGaps, MISSING_OPTIONS, missingOptions, modelColumns } from './missingData';
import { CsvInputError, readCohortCsv } from './readCohortCsv';

const USAGE =
  'usage: plumbline validate --csv FILE --outcome COL (--prediction COL | --model MODEL.json) [--thresholds 0.05,0.1,0.2,0.3,0.5] [--format json|table]\n' +
  '         [--bootstrap N [--seed S]] [--group COL[,COL…]] [--site COL]\n' +
  '         [--missing complete-case|mi [--imputations 20] [--iterations 5] [--seed N] [--imputation-columns A,B]]';

class UsageError extends Error {}

function parseArgs(argv: string[]): Record<string, string> {
  const out: Record<string, string> = {};
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i];
    if (!a.startsWith('--')) throw new UsageError(`unexpected argument ${a}`);
    const v = argv[i + 1];
    if (v === undefined || v.startsWith('--')) throw new UsageError(`${a} needs a value`);
    out[a.slice(2)] = v;
    i++;
  }
  return out;
}

const num = (v: number) => (Number.isFinite(v) ? v : null);
const est = (e: Estimate) => ({ estimate: num(e.estimate), lower: num(e.lower), upper: num(e.upper) });
const fit = (f: FitResult<Estimate & { se: number }>) => (f.converged ? { ...est(f), se: num(f.se) } : null);

/**
 * A caution when events or non-events are fewer than the minimum the adequacy panel names (shared/adequacy.ts): the
 * slope, Hosmer–Lemeshow and ICI are then imprecise however they look.
 */
export function smallSampleCaution(events: number, n: number): string | null {
  const verdict = adequacyVerdict(events, n - events);
  if (verdict.meetsMinimum) return null;
  return (
    `small sample: ${events} event(s) and ${n - events} non-event(s), below the minimum of ${MINIMUM_EACH} of each (${ADEQUACY_SOURCES.minimum}); ` +
    'the calibration slope and intercept, Hosmer–Lemeshow and ICI/E50/E90/Emax are imprecise and may mislead'
  );
}

/** The CLI's JSON: exactly the keys the command documents, NaN as null. */
export function toCliJson(r: ValidationResult) {
  return {
    n: r.n,
    events: r.events,
    auc: { ...est(r.auc), se: num(r.auc.se) },
    logLoss: r.logLoss,
    logLossTotal: r.logLossTotal,
    brier: r.brier,
    scaledBrier: r.scaledBrier,
    calibrationIntercept: fit(r.calibrationIntercept),
    calibrationSlope: fit(r.calibrationSlope),
    oe: est(r.oe),
    hosmerLemeshow: {
      statistic: num(r.hosmerLemeshow.statistic),
      df: r.hosmerLemeshow.df,
      pValue: num(r.hosmerLemeshow.pValue),
      groups: r.hosmerLemeshow.groups,
    },
    spiegelhalter: { z: num(r.spiegelhalter.z), pValue: num(r.spiegelhalter.pValue) },
    ici: r.ici,
    e50: r.e50,
    e90: r.e90,
    emax: r.emax,
    netBenefit: r.netBenefit.map((b) => ({
      threshold: b.threshold,
      model: b.model,
      treatAll: b.treatAll,
      standardized: num(b.standardized ?? NaN),
    })),
    thresholds: r.thresholds.map((t) => ({
      threshold: t.threshold,
      sensitivity: est(t.sensitivity),
      specificity: est(t.specificity),
      ppv: est(t.ppv),
      npv: est(t.npv),
      tp: t.tp,
      fp: t.fp,
      tn: t.tn,
      fn: t.fn,
    })),
    warnings: [...[smallSampleCaution(r.events, r.n)].filter((w): w is string => w !== null), ...r.warnings],
  };
}

// Figures as on every page and in the report (shared/src/format.ts); --format json keeps full precision.
const ci = (figure: Figure, e: Interval | null) => (e ? formatEstimateShort(figure, e) : 'not estimable');
const ciSe = (figure: Figure, e: (Interval & { se: number | null }) | null) =>
  e ? `${ci(figure, e)}, SE ${f(e.se)}` : 'not estimable';
const f = (v: number | null | undefined, digits = 4) => formatNumber(v, digits);
/** An interval at a set number of decimals, for the optional sections' figures that have no set decimals of their own. */
const ciAt = (e: { estimate: number | null; lower: number | null; upper: number | null } | null, d = 4) =>
  e ? `${f(e.estimate, d)}  (${f(e.lower, d)} to ${f(e.upper, d)})` : 'not estimable';

/** An AUC interval inside [0, 1]: DeLong's normal approximation can reach past the ends on small or extreme cohorts. */
function aucInterval(auc: { estimate: number | null; lower: number | null; upper: number | null }): {
  text: string;
  note: string | null;
} {
  const outside = (auc.lower !== null && auc.lower < 0) || (auc.upper !== null && auc.upper > 1);
  if (!outside) return { text: ci('auc', auc), note: null };
  const clamp = (v: number | null) => (v === null ? null : Math.min(1, Math.max(0, v)));
  return {
    text: `${ci('auc', { ...auc, lower: clamp(auc.lower), upper: clamp(auc.upper) })} †`,
    note: `† DeLong's interval is a normal approximation and reached ${formatFigure('auc', auc.lower)} to ${formatFigure('auc', auc.upper)}, beyond the possible 0 to 1; it is shown truncated to [0, 1] (--format json gives it untruncated).`,
  };
}

export function toTable(r: ValidationResult): string {
  const j = toCliJson(r);
  const auc = aucInterval(j.auc);
  const rows: [string, string][] = [
    ['Rows', formatCount(j.n)],
    ['Events', `${formatCount(j.events)} (${formatPercent(r.eventRate)})`],
    ['AUC (95% CI, DeLong)', auc.text],
    [
      'Log loss (mean / total)',
      `${formatFigure('logLoss', j.logLoss)} / ${formatFigure('logLossTotal', j.logLossTotal)}`,
    ],
    ['Brier / scaled Brier', `${formatFigure('brier', j.brier)} / ${formatFigure('scaledBrier', j.scaledBrier)}`],
    ['Calibration intercept', ciSe('calibrationIntercept', j.calibrationIntercept)],
    ['Calibration slope', ciSe('calibrationSlope', j.calibrationSlope)],
    ['O/E', ci('oe', j.oe)],
    [
      'Hosmer–Lemeshow',
      `${formatFigure('chiSquare', j.hosmerLemeshow.statistic)} on ${j.hosmerLemeshow.df} df, ${formatPValue(j.hosmerLemeshow.pValue)}`,
    ],
    ['Spiegelhalter z', `${formatFigure('z', j.spiegelhalter.z)}, ${formatPValue(j.spiegelhalter.pValue)}`],
    ['ICI / E50 / E90 / Emax', [j.ici, j.e50, j.e90, j.emax].map((v) => formatFigure('ici', v)).join(' / ')],
  ];
  const w = Math.max(...rows.map(([k]) => k.length));
  const caution = smallSampleCaution(r.events, r.n);
  const lines = [...(caution ? [`Caution: ${caution}.`, ''] : []), ...rows.map(([k, v]) => `${k.padEnd(w)}  ${v}`)];
  if (auc.note) lines.push(auc.note);
  lines.push('', 'Threshold  Sens    Spec    PPV     NPV       TP      FP      TN      FN   NB model  NB all');
  j.thresholds.forEach((t, i) => {
    const nb = j.netBenefit[i];
    lines.push(
      [
        formatFigure('risk', t.threshold).padEnd(9),
        formatFigure('risk', t.sensitivity.estimate).padStart(5),
        formatFigure('risk', t.specificity.estimate).padStart(7),
        formatFigure('risk', t.ppv.estimate).padStart(7),
        formatFigure('risk', t.npv.estimate).padStart(7),
        String(t.tp).padStart(8),
        String(t.fp).padStart(7),
        String(t.tn).padStart(7),
        String(t.fn).padStart(7),
        formatFigure('netBenefit', nb.model).padStart(9),
        formatFigure('netBenefit', nb.treatAll).padStart(7),
      ].join(' '),
    );
  });
  if (r.warnings.length) lines.push('', 'Warnings:', ...r.warnings.map((x) => `- ${x}`));
  return lines.join('\n');
}

// ---- optional sections: --bootstrap, --group, --site ----

type Band = ReturnType<typeof calibrationBand>;
interface CliExtra {
  bootstrap?: ReturnType<typeof bootstrapJson>;
  subgroups?: ({ column: string } & SubgroupAnalysis)[];
  sites?: { column: string } & SiteAnalysis;
}

/** The bootstrap section: percentile CIs of the figures that have no closed-form interval, and the curve's band. */
export function bootstrapJson(r: ValidationResult, band: Band) {
  const b = r.bootstrap!;
  const iv = (key: string) => ({ ...est(b.intervals[key]), failedReplicates: b.failed?.[key] ?? 0 });
  return {
    replicates: b.replicates,
    seed: b.seed,
    method: b.method,
    brier: iv('brier'),
    scaledBrier: iv('scaledBrier'),
    ici: iv('ici'),
    e50: iv('e50'),
    e90: iv('e90'),
    emax: iv('emax'),
    netBenefit: r.netBenefit.map((nb) => ({
      threshold: nb.threshold,
      model: iv(`netBenefit@${nb.threshold}`),
      standardized: iv(`standardizedNetBenefit@${nb.threshold}`),
    })),
    calibrationBand: {
      p: band.p,
      observed: band.observed.map(num),
      lower: band.lower.map(num),
      upper: band.upper.map(num),
      method: band.method,
    },
  };
}

const levelJson = (l: LevelPerformance) => ({
  level: l.level,
  n: l.n,
  events: l.events,
  nonEvents: l.nonEvents,
  belowMinimum: l.belowMinimum,
  error: l.error,
  auc: l.auc && { ...est(l.auc), se: num(l.auc.se) },
  calibrationIntercept: l.calibrationIntercept && {
    ...est(l.calibrationIntercept),
    se: num(l.calibrationIntercept.se),
  },
  calibrationSlope: l.calibrationSlope && { ...est(l.calibrationSlope), se: num(l.calibrationSlope.se) },
  oe: l.oe && { ...est(l.oe), seLog: num(l.oe.seLog) },
  ici: l.ici && est(l.ici),
});

function extraJson(x: CliExtra) {
  return {
    ...(x.bootstrap ? { bootstrap: x.bootstrap } : {}),
    ...(x.subgroups
      ? {
          subgroups: x.subgroups.map((g) => ({
            column: g.column,
            levels: g.levels.map(levelJson),
            heterogeneity: g.heterogeneity,
          })),
        }
      : {}),
    ...(x.sites
      ? { sites: { column: x.sites.column, levels: x.sites.levels.map(levelJson), pooled: x.sites.pooled } }
      : {}),
  };
}

function levelRows(levels: LevelPerformance[]): string[] {
  const head = [
    'Level',
    'n',
    'Events',
    'AUC (95% CI)',
    'Cal. intercept (95% CI)',
    'Cal. slope (95% CI)',
    'O/E (95% CI)',
    'ICI (95% CI)',
    '',
  ];
  const cell = (e: Estimate | null, d = 3) => (e ? `${f(e.estimate, d)} (${f(e.lower, d)} to ${f(e.upper, d)})` : '—');
  const rows = levels.map((l) => [
    l.level,
    String(l.n),
    String(l.events),
    cell(l.auc),
    cell(l.calibrationIntercept),
    cell(l.calibrationSlope),
    cell(l.oe, 2),
    cell(l.ici, 4),
    [
      l.belowMinimum ? `below the minimum of ${MINIMUM_EACH} events and non-events` : '',
      l.error ? `not computed: ${l.error}` : '',
    ]
      .filter(Boolean)
      .join('; '),
  ]);
  const w = head.map((h, k) => Math.max(h.length, ...rows.map((r) => r[k].length)));
  return [head, ...rows].map((r) =>
    r
      .map((c, k) => c.padEnd(w[k]))
      .join('  ')
      .trimEnd(),
  );
}

function extraTables(x: CliExtra): string[] {
  const out: string[] = [];
  if (x.bootstrap) {
    const b = x.bootstrap;
    out.push(
      [
        `Bootstrap 95% CIs (${b.replicates} replicates, seed ${b.seed}; ${b.method})`,
        `Brier          ${ciAt(b.brier)}`,
        `Scaled Brier   ${ciAt(b.scaledBrier)}`,
        `ICI            ${ciAt(b.ici)}`,
        `E50            ${ciAt(b.e50)}`,
        `E90            ${ciAt(b.e90)}`,
        `Emax           ${ciAt(b.emax)}`,
        ...b.netBenefit.map(
          (nb) => `NB at ${f(nb.threshold, 3)}    ${ciAt(nb.model)}   standardised ${ciAt(nb.standardized)}`,
        ),
        `Calibration curve: pointwise 95% band at ${b.calibrationBand.p.length} fixed points in --format json.`,
      ].join('\n'),
    );
  }
  for (const g of x.subgroups ?? []) {
    const het = (name: string, h: SubgroupAnalysis['heterogeneity']['logOe']) =>
      h.result
        ? `${name}: Q = ${f(h.result.q, 3)} on ${h.result.df} df, p = ${f(h.result.pValue)} (${h.levels.length} levels)`
        : `${name}: not tested (fewer than 2 levels with an estimate)`;
    out.push(
      [
        `Subgroups by ${g.column}`,
        ...levelRows(g.levels),
        `Heterogeneity across levels (${g.heterogeneity.logOe.result?.method ?? "Cochran's Q"}):`,
        `  ${het('calibration-in-the-large', g.heterogeneity.calibrationIntercept)}`,
        `  ${het('log O/E', g.heterogeneity.logOe)}`,
      ].join('\n'),
    );
  }
  if (x.sites) {
    const names: Record<string, string> = {
      logitAuc: 'AUC',
      calibrationIntercept: 'Calibration intercept',
      calibrationSlope: 'Calibration slope',
      logOe: 'O/E',
    };
    const pooled = Object.entries(x.sites.pooled).map(([k, a]) => {
      const r = a.result;
      if (!r) return `  ${names[k]}: not pooled (fewer than 2 sites with an estimate)`;
      const n = r.natural;
      return `  ${names[k]}: ${f(n.estimate)} (95% CI ${f(n.lower)} to ${f(n.upper)}); 95% prediction interval ${f(n.predictionLower)} to ${f(n.predictionUpper)}; τ² = ${f(r.tau2, 5)}, I² = ${f(r.i2, 1)}%, Q = ${f(r.q, 3)} on ${r.qDf} df, p = ${f(r.qPValue)} (${r.k} sites)`;
    });
    out.push(
      [
        `Sites by ${x.sites.column}`,
        ...levelRows(x.sites.levels),
        'Random-effects meta-analysis (REML; AUC pooled on the logit scale and O/E on the log scale, shown back-transformed; prediction interval with t on k − 2 df, Riley et al. 2011):',
        ...pooled,
      ].join('\n'),
    );
  }
  return out;
}

async function run(argv: string[]): Promise<void> {
  const [command, ...rest] = argv;
  if (command !== 'validate') throw new UsageError(command ? `unknown command ${command}` : 'no command');
  const args = parseArgs(rest);
  for (const k of Object.keys(args))
    if (
      ![
        'csv',
        'outcome',
        'prediction',
        'model',
        'thresholds',
        'format',
        'bootstrap',
        'group',
        'site',
        ...MISSING_OPTIONS,
      ].includes(k)
    )
      throw new UsageError(`unknown option --${k}`);
  if (!args.csv || !args.outcome) throw new UsageError('--csv and --outcome are required');
  if (!!args.prediction === !!args.model) throw new UsageError('give exactly one of --prediction and --model');
  const format = args.format ?? 'json';
  if (format !== 'json' && format !== 'table') throw new UsageError('--format is json or table');
  const thresholds = args.thresholds ? args.thresholds.split(',').map(Number) : undefined;
  if (thresholds?.some((t) => !(t > 0 && t < 1)))
    throw new UsageError('--thresholds are numbers strictly between 0 and 1, comma-separated');
  const replicates = args.bootstrap === undefined ? 0 : Number(args.bootstrap);
  if (!(Number.isInteger(replicates) && replicates >= 0 && replicates <= 100_000))
    throw new UsageError('--bootstrap is a whole number of replicates, 0 to 100000');
  if (args.seed !== undefined && args.bootstrap === undefined && args.missing === undefined)
    throw new UsageError('--seed goes with --bootstrap or --missing mi');
  const seed = args.seed === undefined ? undefined : Number(args.seed);
  if (seed !== undefined && !(Number.isInteger(seed) && seed >= 0 && seed <= 0xffffffff))
    throw new UsageError('--seed is a whole number, 0 to 4294967295');
  const groupColumns = args.group ? args.group.split(',').map((c) => c.trim()) : [];
  if (groupColumns.some((c) => !c)) throw new UsageError('--group is one column name or several, comma-separated');
  let model: ScoreModel | undefined;
  if (args.model) {
    let raw: unknown;
    try {
      raw = JSON.parse(readFileSync(args.model, 'utf8'));
    } catch (e) {
      throw new CsvInputError(args.model, null, null, `cannot read the model JSON (${(e as Error).message})`);
    }
    const parsed = scoreModelSchema.safeParse(raw);
    if (!parsed.success)
      throw new CsvInputError(
        args.model,
        null,
        null,
        `not a valid model: ${parsed.error.issues.map((i) => `${i.path.join('.') || '(root)'} ${i.message}`).join('; ')}`,
      );
    model = parsed.data;
  }
  const missing = missingOptions(args, (message) => {
    throw new UsageError(message);
  });
  if (missing && (replicates > 0 || groupColumns.length || args.site))
    throw new UsageError('--missing runs on its own: leave out --bootstrap, --group and --site');
  const labelColumns = [...new Set([...groupColumns, ...(args.site ? [args.site] : [])])];
  const { p, y, labels, kept } = await readCohortCsv(args.csv, {
    outcome: args.outcome,
    prediction: args.prediction,
    model,
    labels: labelColumns,
    keep: missing ? [...new Set([...modelColumns(model!), ...missing.extraColumns])] : undefined,
  });
  const settings = resolveSettings({
    ...(thresholds ? { thresholds } : {}),
    bootstrapReplicates: replicates,
    ...(seed !== undefined ? { bootstrapSeed: seed } : {}),
  });
  let result: ValidationResult;
  let extra: CliExtra;
  try {
    if (missing) {
      const gaps = analyseGaps(args.csv, model!, y, kept!, missing, thresholds, toCliJson);
      process.stdout.write(
        format === 'json'
          ? `${JSON.stringify({ ...toCliJson(gaps.main), missingData: gaps.details }, null, 2)}\n`
          : `${toTable(gaps.main)}\n\n${gaps.table.join('\n')}\n`,
      );
      return;
    }
    result = validate(p, y, settings);
    extra = {
      ...(replicates > 0
        ? { bootstrap: bootstrapJson(result, calibrationBand(p, y, result.calibrationCurve.smoothed, settings)) }
        : {}),
      ...(groupColumns.length
        ? { subgroups: groupColumns.map((c) => ({ column: c, ...subgroupAnalysis(p, y, labels[c], settings) })) }
        : {}),
      ...(args.site ? { sites: { column: args.site, ...siteAnalysis(p, y, labels[args.site], settings) } } : {}),
    };
  } catch (e) {
    if (e instanceof EngineInputError) {
      throw new CsvInputError(
        args.csv,
        e.row === null ? null : e.row + 1,
        e.field === 'outcome' ? args.outcome : e.field === 'prediction' ? (args.prediction ?? 'model') : null,
        e.message.replace(/^row \d+: /, ''),
      );
    }
    throw e;
  }
  process.stdout.write(
    format === 'json'
      ? `${JSON.stringify({ ...toCliJson(result), ...extraJson(extra) }, null, 2)}\n`
      : `${[toTable(result), ...extraTables(extra)].join('\n\n')}\n`,
  );
}

run(process.argv.slice(2)).catch((e: unknown) => {
  if (e instanceof UsageError) {
    process.stderr.write(`plumbline: ${e.message}\n${USAGE}\n`);
    process.exit(2);
  }
  process.stderr.write(`plumbline: ${e instanceof Error ? e.message : String(e)}\n`);
  process.exit(1);
});
