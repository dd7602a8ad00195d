// Invented demo patients for the fictional Fernhollow Regional Hospital, drawn from the fictional Kestrel score
// with a baseline risk that drifts upwards by quarter. Seeded, so the same call always writes the same file.

import { mulberry32 } from '../../stats/bootstrap';
/** mulberry32, the engine's seeded PRNG (common practice, no source needed for a demo generator). */
export const seededRandom = mulberry32;

export const KESTREL_HEADER = [
  'age',
  'length_of_stay',
  'prior_admissions',
  'emergency_admission',
  'charlson_index',
  'readmitted_30d',
  'discharge_date',
  'sex',
  'age_band',
  'unit',
  'site',
];
const UNITS = ['Birch', 'Cedar', 'Alder', 'Rowan'];

/** Kestrel's made-up formula (version 1): logit p = −3.6 + 0.012·age + 0.35·ln LOS + 0.28·prior + 0.45·[emergency] + 0.11·Charlson. */
export function kestrelLogit(age: number, los: number, prior: number, emergency: boolean, charlson: number): number {
  return -3.6 + 0.012 * age + 0.35 * Math.log(los) + 0.28 * prior + 0.45 * (emergency ? 1 : 0) + 0.11 * charlson;
}

export interface QuarterSpec {
  year: number;
  quarter: 1 | 2 | 3 | 4;
  /** Quarters since 2024-Q1: the baseline logit rises by 0.08 per quarter. */
  index: number;
  n: number;
  seed: number;
}

function poisson(rand: () => number, mean: number): number {
  const l = Math.exp(-mean);
  let k = 0;
  let p = 1;
  do {
    k++;
    p *= rand();
  } while (p > l);
  return k - 1;
}

/** One quarter's rows as CSV lines (header first). Ages over 89 are written as "90+" (Safe Harbor grouping). */
export function* kestrelQuarterCsv(q: QuarterSpec): Generator<string> {
  const rand = seededRandom(q.seed);
  yield KESTREL_HEADER.join(',');
  for (let i = 0; i < q.n; i++) {
    const age = Math.min(96, Math.max(18, Math.round(67 + 15 * normal(rand))));
    const los = Math.max(1, Math.round(Math.exp(1.5 + 0.6 * normal(rand))));
    const prior = Math.min(9, poisson(rand, 0.9));
    const emergency = rand() < 0.62;
    const charlson = Math.min(12, poisson(rand, 2.1));
    const lp = kestrelLogit(Math.min(age, 90), los, prior, emergency, charlson) + 0.08 * q.index;
    const y = rand() < 1 / (1 + Math.exp(-lp));
    const month = (q.quarter - 1) * 3 + 1 + Math.floor(rand() * 3);
    const sex = rand() < 0.52 ? 'F' : 'M';
    const band = age < 45 ? '18-44' : age < 65 ? '45-64' : age < 80 ? '65-79' : '80+';
    const unit = UNITS[Math.floor(rand() * 4)];
    const site = unit === 'Rowan' || rand() < 0.15 ? 'North annex' : 'Main campus';
    yield [
      age > 89 ? '90+' : String(age),
      los,
      prior,
      emergency ? 'yes' : 'no',
      charlson,
      y ? 'yes' : 'no',
      `${q.year}-${String(month).padStart(2, '0')}`,
      sex,
      band,
      unit,
      site,
    ].join(',');
  }
}

function normal(rand: () => number): number {
  // Box–Muller.
  const u = Math.max(rand(), 1e-12);
  return Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * rand());
}

/** The eight demo quarters 2024-Q1 … 2025-Q4 with 1,500–2,500 patients each. */
export function demoQuarters(): QuarterSpec[] {
  const out: QuarterSpec[] = [];
  const rand = seededRandom(20240101);
  for (let i = 0; i < 8; i++) {
    out.push({
      year: 2024 + Math.floor(i / 4),
      quarter: ((i % 4) + 1) as 1 | 2 | 3 | 4,
      index: i,
      n: 1500 + Math.floor(rand() * 1001),
      seed: 1000 + i,
    });
  }
  return out;
}
