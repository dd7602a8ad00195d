/**
 * Minimum sample size for external validation of a logistic prediction model with a binary outcome,
 * for a target 95% CI width of O/E, the C statistic and the calibration slope (φ = anticipated outcome proportion).
 *   O/E:   n = (1 − φ) / (φ · SE(ln O/E)²), SE from the CI width on the O/E scale around O/E = 1:
 *          width = e^{1.96·SE} − e^{−1.96·SE}  ⇒  SE = asinh(width/2) / 1.96.
 *   C:     SE(C)² = C(1−C)[1 + (n/2 − 1)(1−C)/(2−C) + (n/2 − 1)C/(1+C)] / (n² φ(1−φ)), SE = width/3.92, solved for n.
 *   slope: n = I00 / (SE² (I00·I11 − I01²)), I_ab = E[LP^(a+b) e^LP/(1+e^LP)²] over the anticipated LP distribution,
 *          SE = width/3.92.
 *   Anticipated miscalibration [mem, as recalled from Riley et al. 2021]: the O/E CI is O/E·e^{±1.96·SE}, so
 *          width = O/E·(e^{1.96·SE} − e^{−1.96·SE}); the slope's information uses the true risk expit(α + β·LP) with β the
 *          anticipated slope and α solved so that the mean true risk equals φ.
 *   net benefit: standardised NB sNB = sens − (1 − spec)·w, w = (1 − φ)/φ · t/(1 − t) at threshold t; by the delta
 *          method over sens, spec and φ, n·Var(sNB) = sens(1−sens)/φ + w²·spec(1−spec)/(1−φ) + w²(1−spec)²/(φ(1−φ))
 *          (the form given by Riley et al. 2021 [mem]; checked by simulation in tests/unit/stats/sampleSize.test.ts).
 * LP distributions: Normal(μ, σ) solved from φ and C (below), Normal(μ, σ) given, Beta(a, b) on the risk scale (LP =
 *          logit p, density p^a (1 − p)^b up to a constant on the LP scale), or the predicted risks of a cohort.
 * Source: Riley RD, Debray TPA, Collins GS, et al. (2021). Minimum sample size for external validation of a clinical
 * prediction model with a binary outcome. Stat Med 40:4230–4251.
 * Choices: the anticipated LP distribution is Normal(μ, σ) with (μ, σ) solved so that E[expit(LP)] = φ and the
 * C statistic of LP against outcomes drawn from expit(LP) equals the anticipated C (as Riley et al. suggest when no
 * LP distribution is known), i.e. the model is assumed well calibrated. Integrals by the trapezoid rule on
 * μ ± 10σ with 4,001 points; C by pairs of grid points. n is rounded up; events = n·φ rounded up.
 */

const Z = 1.959963984540054;

import type { SampleSizeCriterion, SampleSizeLpKind, SampleSizePlan } from '@shared/drift';

export type { SampleSizeCriterion, SampleSizePlan };

const expit = (x: number) => 1 / (1 + Math.exp(-x));
const withEvents = (c: Omit<SampleSizeCriterion, 'events'>, phi: number): SampleSizeCriterion => ({
  ...c,
  events: Math.ceil(c.n * phi),
});

export function sampleSizeOE(eventRate: number, ciWidth: number, anticipatedOE = 1): SampleSizeCriterion {
  const se = Math.asinh(ciWidth / (2 * anticipatedOE)) / Z;
  const n = Math.ceil((1 - eventRate) / (eventRate * se * se) - 1e-9);
  return withEvents({ criterion: 'oe', ciWidth, targetSe: se, n }, eventRate);
}

/** SE(C) at sample size n by the Riley et al. (2021) formula (their eq. for the C statistic). */
export function seAuc(n: number, eventRate: number, c: number): number {
  const k = n / 2 - 1;
  const v = (c * (1 - c) * (1 + (k * (1 - c)) / (2 - c) + (k * c) / (1 + c))) / (n * n * eventRate * (1 - eventRate));
  return Math.sqrt(v);
}

export function sampleSizeAuc(eventRate: number, c: number, ciWidth: number): SampleSizeCriterion {
  const se = ciWidth / (2 * Z);
  // SE(C) falls monotonically in n: smallest integer n with SE(C) ≤ target, by bisection
  let lo = 4;
  let hi = 4;
  while (seAuc(hi, eventRate, c) > se) hi *= 2;
  while (hi - lo > 1) {
    const mid = Math.floor((lo + hi) / 2);
    if (seAuc(mid, eventRate, c) > se) lo = mid;
    else hi = mid;
  }
  return withEvents({ criterion: 'auc', ciWidth, targetSe: se, n: hi }, eventRate);
}

export interface Grid {
  x: Float64Array;
  w: Float64Array; // density × trapezoid weight
}

/** Beta(a, b) risks on the LP scale: density ∝ p^a (1 − p)^b with p = expit(x), normalised on the grid. */
export function betaGrid(a: number, b: number, points = 20001): Grid {
  // the tails fall like e^{a·x} and e^{−b·x}: 40/shape covers e^{−40} of them
  const lo = -Math.min(40 / a, 2000);
  const hi = Math.min(40 / b, 2000);
  const x = new Float64Array(points);
  const w = new Float64Array(points);
  const dx = (hi - lo) / (points - 1);
  let logMax = -Infinity;
  const logD = new Float64Array(points);
  for (let i = 0; i < points; i++) {
    x[i] = lo + i * dx;
    // log p = −log(1 + e^{−x}), log(1 − p) = −log(1 + e^{x}), computed stably
    const logP = -softplus(-x[i]);
    const logQ = -softplus(x[i]);
    logD[i] = a * logP + b * logQ;
    if (logD[i] > logMax) logMax = logD[i];
  }
  let total = 0;
  for (let i = 0; i < points; i++) {
    w[i] = Math.exp(logD[i] - logMax) * (i === 0 || i === points - 1 ? 0.5 : 1);
    total += w[i];
  }
  for (let i = 0; i < points; i++) w[i] /= total;
  return { x, w };
}

const softplus = (v: number) => (v > 0 ? v + Math.log1p(Math.exp(-v)) : Math.log1p(Math.exp(v)));

/** The predicted risks of a cohort, each with weight 1/n; risks of exactly 0 or 1 are held at 1e-12 from the edge. */
export function empiricalGrid(risks: ArrayLike<number>): Grid {
  const n = risks.length;
  const x = new Float64Array(n);
  const w = new Float64Array(n).fill(1 / n);
  for (let i = 0; i < n; i++) {
    const p = Math.min(Math.max(risks[i], 1e-12), 1 - 1e-12);
    x[i] = Math.log(p / (1 - p));
  }
  return { x, w };
}

/** Intercept α such that the mean of expit(α + β·LP) over the grid is φ (bisection; the mean rises with α). */
export function interceptFor(g: Grid, slope: number, eventRate: number): number {
  let lo = -60;
  let hi = 60;
  for (let it = 0; it < 100; it++) {
    const mid = (lo + hi) / 2;
    let m = 0;
    for (let i = 0; i < g.x.length; i++) m += g.w[i] * expit(mid + slope * g.x[i]);
    if (m < eventRate) lo = mid;
    else hi = mid;
  }
  return (lo + hi) / 2;
}

/** I_ab = E[LP^(a+b) p(1 − p)] with p = expit(α + β·LP) the true risk, over the grid. */
export function gridInformation(g: Grid, intercept = 0, slope = 1): { i00: number; i01: number; i11: number } {
  let i00 = 0;
  let i01 = 0;
  let i11 = 0;
  for (let i = 0; i < g.x.length; i++) {
    const p = expit(intercept + slope * g.x[i]);
    const v = g.w[i] * p * (1 - p);
    i00 += v;
    i01 += v * g.x[i];
    i11 += v * g.x[i] * g.x[i];
  }
  return { i00, i01, i11 };
}

export function normalGrid(mean: number, sd: number, points = 4001): Grid {
  const x = new Float64Array(points);
  const w = new Float64Array(points);
  const lo = mean - 10 * sd;
  const dx = (20 * sd) / (points - 1);
  for (let i = 0; i < points; i++) {
    x[i] = lo + i * dx;
    const z = (x[i] - mean) / sd;
    w[i] = (Math.exp(-0.5 * z * z) / (sd * Math.sqrt(2 * Math.PI))) * dx * (i === 0 || i === points - 1 ? 0.5 : 1);
  }
  return { x, w };
}

const meanRisk = (g: Grid) => g.x.reduce((s, x, i) => s + g.w[i] * expit(x), 0);

/** C statistic of a well-calibrated LP ~ g: P(LP_event > LP_non-event), ties count one half. */
function cOfGrid(g: Grid): number {
  const m = g.x.length;
  let cumNon = 0; // mass of non-events strictly below the current point
  let num = 0;
  let ev = 0;
  let non = 0;
  for (let i = 0; i < m; i++) {
    const e = g.w[i] * expit(g.x[i]);
    const ne = g.w[i] * (1 - expit(g.x[i]));
    num += e * (cumNon + 0.5 * ne);
    cumNon += ne;
    ev += e;
    non += ne;
  }
  return num / (ev * non);
}

/** Normal LP distribution matching the anticipated outcome proportion and C (model assumed well calibrated). */
export function anticipatedLpDistribution(eventRate: number, c: number): { mean: number; sd: number } {
  const meanFor = (sd: number) => {
    let lo = -30;
    let hi = 30;
    for (let it = 0; it < 80; it++) {
      const mid = (lo + hi) / 2;
      if (meanRisk(normalGrid(mid, sd, 1201)) < eventRate) lo = mid;
      else hi = mid;
    }
    return (lo + hi) / 2;
  };
  let lo = 0.01;
  let hi = 8;
  for (let it = 0; it < 50; it++) {
    const mid = (lo + hi) / 2;
    if (cOfGrid(normalGrid(meanFor(mid), mid, 1201)) < c) lo = mid;
    else hi = mid;
  }
  const sd = (lo + hi) / 2;
  return { mean: meanFor(sd), sd };
}

/** I_ab elements of the per-patient Fisher information for (intercept, slope) of a logistic model on LP. */
export function slopeInformation(mean: number, sd: number): { i00: number; i01: number; i11: number } {
  const g = normalGrid(mean, sd);
  let i00 = 0;
  let i01 = 0;
  let i11 = 0;
  for (let i = 0; i < g.x.length; i++) {
    const p = expit(g.x[i]);
    const v = g.w[i] * p * (1 - p);
    i00 += v;
    i01 += v * g.x[i];
    i11 += v * g.x[i] * g.x[i];
  }
  return { i00, i01, i11 };
}

export function sampleSizeSlope(
  eventRate: number,
  ciWidth: number,
  lp: { mean: number; sd: number },
): SampleSizeCriterion {
  const se = ciWidth / (2 * Z);
  const { i00, i01, i11 } = slopeInformation(lp.mean, lp.sd);
  const n = Math.ceil(i00 / (se * se * (i00 * i11 - i01 * i01)) - 1e-9);
  return withEvents({ criterion: 'slope', ciWidth, targetSe: se, n }, eventRate);
}

/** Slope criterion over any LP grid, with the anticipated calibration slope β (α solved so the mean true risk is φ). */
export function sampleSizeSlopeOn(
  eventRate: number,
  ciWidth: number,
  g: Grid,
  slope = 1,
): SampleSizeCriterion & { intercept: number } {
  const se = ciWidth / (2 * Z);
  const intercept = interceptFor(g, slope, eventRate);
  const { i00, i01, i11 } = gridInformation(g, intercept, slope);
  const n = Math.ceil(i00 / (se * se * (i00 * i11 - i01 * i01)) - 1e-9);
  return { ...withEvents({ criterion: 'slope', ciWidth, targetSe: se, n }, eventRate), intercept };
}

/** n·Var(standardised net benefit) at threshold t (delta method; Riley et al. 2021 [mem]). */
export function netBenefitVariance(eventRate: number, sens: number, spec: number, threshold: number): number {
  const phi = eventRate;
  const w = ((1 - phi) / phi) * (threshold / (1 - threshold));
  return (
    (sens * (1 - sens)) / phi + (w * w * spec * (1 - spec)) / (1 - phi) + (w * w * (1 - spec) ** 2) / (phi * (1 - phi))
  );
}

export function sampleSizeNetBenefit(
  eventRate: number,
  ciWidth: number,
  nb: { sensitivity: number; specificity: number; threshold: number },
): SampleSizeCriterion {
  const se = ciWidth / (2 * Z);
  const v = netBenefitVariance(eventRate, nb.sensitivity, nb.specificity, nb.threshold);
  const n = Math.ceil(v / (se * se) - 1e-9);
  return withEvents({ criterion: 'netBenefit', ciWidth, targetSe: se, n }, eventRate);
}

export interface PlanInput {
  eventRate: number;
  auc: number;
  ciWidthOE?: number;
  ciWidthAuc?: number;
  ciWidthSlope?: number;
  ciWidthNb?: number;
  anticipatedOE?: number;
  anticipatedSlope?: number;
  lpDistribution?: SampleSizeLpKind;
  lpMean?: number;
  lpSd?: number;
  betaA?: number;
  betaB?: number;
  /** predicted risks for lpDistribution 'cohort' */
  risks?: ArrayLike<number>;
  threshold?: number;
  sensitivity?: number;
  specificity?: number;
}

export function planSampleSize(input: PlanInput): SampleSizePlan {
  const { eventRate, auc } = input;
  if (!(eventRate > 0 && eventRate < 1)) throw new RangeError('eventRate must lie strictly between 0 and 1');
  if (!(auc > 0.5 && auc < 1)) throw new RangeError('auc must lie strictly between 0.5 and 1');
  const anticipatedOE = input.anticipatedOE ?? 1;
  const anticipatedSlope = input.anticipatedSlope ?? 1;
  const kind = input.lpDistribution ?? 'fromC';
  const criteria: SampleSizeCriterion[] = [];
  let lpDistribution: SampleSizePlan['lpDistribution'];
  if (input.ciWidthOE) criteria.push(sampleSizeOE(eventRate, input.ciWidthOE, anticipatedOE));
  if (input.ciWidthAuc) criteria.push(sampleSizeAuc(eventRate, auc, input.ciWidthAuc));
  if (input.ciWidthSlope) {
    let g: Grid;
    let described: Omit<NonNullable<SampleSizePlan['lpDistribution']>, 'intercept' | 'slope'>;
    if (kind === 'normal') {
      if (!(input.lpSd! > 0) || !Number.isFinite(input.lpMean))
        throw new RangeError('normal LP needs lpMean and lpSd > 0');
      g = normalGrid(input.lpMean!, input.lpSd!);
      described = { kind, mean: input.lpMean!, sd: input.lpSd! };
    } else if (kind === 'beta') {
      if (!(input.betaA! > 0 && input.betaB! > 0)) throw new RangeError('beta LP needs betaA > 0 and betaB > 0');
      g = betaGrid(input.betaA!, input.betaB!);
      described = { kind, a: input.betaA!, b: input.betaB! };
    } else if (kind === 'cohort') {
      if (!input.risks || input.risks.length < 2) throw new RangeError('cohort LP needs predicted risks');
      g = empiricalGrid(input.risks);
      described = { kind, patients: input.risks.length };
    } else {
      const lp = anticipatedLpDistribution(eventRate, auc);
      g = normalGrid(lp.mean, lp.sd);
      described = { kind: 'fromC', mean: lp.mean, sd: lp.sd };
    }
    const { intercept, ...c } = sampleSizeSlopeOn(eventRate, input.ciWidthSlope, g, anticipatedSlope);
    criteria.push(c);
    lpDistribution = { ...described, intercept, slope: anticipatedSlope };
  }
  if (input.ciWidthNb) {
    const { sensitivity, specificity, threshold } = input;
    if (!(
      sensitivity! > 0 &&
      sensitivity! < 1 &&
      specificity! > 0 &&
      specificity! < 1 &&
      threshold! > 0 &&
      threshold! < 1
    ))
      throw new RangeError('net benefit needs sensitivity, specificity and threshold strictly between 0 and 1');
    criteria.push(
      sampleSizeNetBenefit(eventRate, input.ciWidthNb, {
        sensitivity: sensitivity!,
        specificity: specificity!,
        threshold: threshold!,
      }),
    );
  }
  const largest = criteria.reduce<SampleSizeCriterion | null>((m, c) => (!m || c.n > m.n ? c : m), null);
  return { eventRate, auc, anticipatedOE, anticipatedSlope, criteria, largest, lpDistribution };
}

/** Precision a cohort of n patients gives: the expected 95% CI widths for O/E, C and slope. */
export function precisionFor(
  n: number,
  eventRate: number,
  c: number,
): { oe: number; auc: number; slope: number | null } {
  const seOE = Math.sqrt((1 - eventRate) / (eventRate * n));
  const oe = Math.exp(Z * seOE) - Math.exp(-Z * seOE);
  const auc = 2 * Z * seAuc(n, eventRate, c);
  let slope: number | null = null;
  if (c > 0.5 && c < 1) {
    const lp = anticipatedLpDistribution(eventRate, c);
    const { i00, i01, i11 } = slopeInformation(lp.mean, lp.sd);
    slope = 2 * Z * Math.sqrt(i00 / (n * (i00 * i11 - i01 * i01)));
  }
  return { oe, auc, slope };
}
