// Plumbline command line: validate a cohort CSV with the same engine the server uses.
//   validate --csv FILE --outcome COL (--prediction COL | --model MODEL.json) [--thresholds 0.05,0.1] [--format json|table]
import { readFileSync } from 'node:fs';
import { scoreModelSchema, type ScoreModel } from '@shared/model';
import type { Estimate, FitResult, ValidationResult } from '@shared/validation';
import { ADEQUACY_SOURCES, adequacyVerdict, MINIMUM_EACH } from '@shared/adequacy';
import { formatCount, formatEstimateShort, formatFigure, formatPercent, formatPValue, type Figure, type Interval } from '@shared/format';
import { EngineInputError, validate } from '../stats/index';
import { analyseGaps, MISSING_OPTIONS, missingOptions, modelColumns } from './missingData';
import { CsvInputError, readCohortCsv } from './readCohortCsv';

const USAGE = 'usage: plumbline validate --csv FILE --outcome COL (--prediction COL | --model MODEL.json) [--thresholds 0.05,0.1,0.2,0.3,0.5] [--format json|table] [--missing complete-case|mi [--imputations 20] [--iterations 5] [--seed N] [--imputation-columns A,B]]';

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
const fit = (f: FitResult<Estimate>) => (f.converged ? est(f) : null);

/**
 * A caution when events or non-events are fewer than the minimum the adequacy panel names (shared/adequacy.ts): the
 * slope, Hosmer–Lemeshow and ICI are then imprecise however they look.
 */
export function smallSampleCaution(events: number, n: number): string | null {
  const verdict = adequacyVerdict(events, n - events);
  if (verdict.meetsMinimum) return null;
  return `small sample: ${events} event(s) and ${n - events} non-event(s), below the minimum of ${MINIMUM_EACH} of each (${ADEQUACY_SOURCES.minimum}); `
    + 'the calibration slope and intercept, Hosmer–Lemeshow and ICI/E50/E90/Emax are imprecise and may mislead';
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
    hosmerLemeshow: { statistic: num(r.hosmerLemeshow.statistic), df: r.hosmerLemeshow.df, pValue: num(r.hosmerLemeshow.pValue), groups: r.hosmerLemeshow.groups },
    spiegelhalter: { z: num(r.spiegelhalter.z), pValue: num(r.spiegelhalter.pValue) },
    ici: r.ici,
    e50: r.e50,
    e90: r.e90,
    emax: r.emax,
    netBenefit: r.netBenefit.map((b) => ({ threshold: b.threshold, model: b.model, treatAll: b.treatAll })),
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

/** An AUC interval inside [0, 1]: DeLong's normal approximation can reach past the ends on small or extreme cohorts. */
function aucInterval(auc: { estimate: number | null; lower: number | null; upper: number | null }): { text: string; note: string | null } {
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
    ['Log loss (mean / total)', `${formatFigure('logLoss', j.logLoss)} / ${formatFigure('logLossTotal', j.logLossTotal)}`],
    ['Brier / scaled Brier', `${formatFigure('brier', j.brier)} / ${formatFigure('scaledBrier', j.scaledBrier)}`],
    ['Calibration intercept', ci('calibrationIntercept', j.calibrationIntercept)],
    ['Calibration slope', ci('calibrationSlope', j.calibrationSlope)],
    ['O/E', ci('oe', j.oe)],
    ['Hosmer–Lemeshow', `${formatFigure('chiSquare', j.hosmerLemeshow.statistic)} on ${j.hosmerLemeshow.df} df, ${formatPValue(j.hosmerLemeshow.pValue)}`],
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
      [formatFigure('risk', t.threshold).padEnd(9), formatFigure('risk', t.sensitivity.estimate).padStart(5), formatFigure('risk', t.specificity.estimate).padStart(7), formatFigure('risk', t.ppv.estimate).padStart(7), formatFigure('risk', t.npv.estimate).padStart(7),
        String(t.tp).padStart(8), String(t.fp).padStart(7), String(t.tn).padStart(7), String(t.fn).padStart(7), formatFigure('netBenefit', nb.model).padStart(9), formatFigure('netBenefit', nb.treatAll).padStart(7)].join(' '),
    );
  });
  if (r.warnings.length) lines.push('', 'Warnings:', ...r.warnings.map((x) => `- ${x}`));
  return lines.join('\n');
}

async function run(argv: string[]): Promise<void> {
  const [command, ...rest] = argv;
  if (command !== 'validate') throw new UsageError(command ? `unknown command ${command}` : 'no command');
  const args = parseArgs(rest);
  for (const k of Object.keys(args)) if (!['csv', 'outcome', 'prediction', 'model', 'thresholds', 'format', ...MISSING_OPTIONS].includes(k)) throw new UsageError(`unknown option --${k}`);
  if (!args.csv || !args.outcome) throw new UsageError('--csv and --outcome are required');
  if (!!args.prediction === !!args.model) throw new UsageError('give exactly one of --prediction and --model');
  const format = args.format ?? 'json';
  if (format !== 'json' && format !== 'table') throw new UsageError('--format is json or table');
  const thresholds = args.thresholds ? args.thresholds.split(',').map(Number) : undefined;
  if (thresholds?.some((t) => !(t > 0 && t < 1))) throw new UsageError('--thresholds are numbers strictly between 0 and 1, comma-separated');
  let model: ScoreModel | undefined;
  if (args.model) {
    let raw: unknown;
    try {
      raw = JSON.parse(readFileSync(args.model, 'utf8'));
    } catch (e) {
      throw new CsvInputError(args.model, null, null, `cannot read the model JSON (${(e as Error).message})`);
    }
    const parsed = scoreModelSchema.safeParse(raw);
    if (!parsed.success) throw new CsvInputError(args.model, null, null, `not a valid model: ${parsed.error.issues.map((i) => `${i.path.join('.') || '(root)'} ${i.message}`).join('; ')}`);
    model = parsed.data;
  }
  const missing = missingOptions(args, (message) => {
    throw new UsageError(message);
  });
  const { p, y, kept } = await readCohortCsv(args.csv, { outcome: args.outcome, prediction: args.prediction, model, keep: missing ? [...new Set([...modelColumns(model!), ...missing.extraColumns])] : undefined });
  let result: ValidationResult;
  try {
    if (missing) {
      const gaps = analyseGaps(args.csv, model!, y, kept!, missing, thresholds, toCliJson);
      process.stdout.write(format === 'json' ? `${JSON.stringify({ ...toCliJson(gaps.main), missingData: gaps.details }, null, 2)}\n` : `${toTable(gaps.main)}\n\n${gaps.table.join('\n')}\n`);
      return;
    }
    result = validate(p, y, thresholds ? { thresholds } : {});
  } catch (e) {
    if (e instanceof EngineInputError) {
      throw new CsvInputError(args.csv, e.row === null ? null : e.row + 1, e.field === 'outcome' ? args.outcome : e.field === 'prediction' ? (args.prediction ?? 'model') : null, e.message.replace(/^row \d+: /, ''));
    }
    throw e;
  }
  process.stdout.write(format === 'json' ? `${JSON.stringify(toCliJson(result), null, 2)}\n` : `${toTable(result)}\n`);
}

run(process.argv.slice(2)).catch((e: unknown) => {
  if (e instanceof UsageError) {
    process.stderr.write(`plumbline: ${e.message}\n${USAGE}\n`);
    process.exit(2);
  }
  process.stderr.write(`plumbline: ${e instanceof Error ? e.message : String(e)}\n`);
  process.exit(1);
});
