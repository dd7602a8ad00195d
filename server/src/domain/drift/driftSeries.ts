// The drift series of one (score version, cohort version): each patient's predicted risk and outcome in event-date
// order, with the date groups, and Σp(1−p) for the funnel limits. Worked out in a worker thread (the run's own, when
// the run completes; or the run thread on demand for a pair that has none yet) and stored in drift_series, so the API
// thread only merges stored arrays (domain/drift/timeline.ts) and never loads or sorts a cohort.
import type { CohortData, Query } from '../cohorts/cohortData';
import { predictedRisk, type RunScoreInput } from '../runs/runCompute';
import { completeCaseData } from '../runs/runMissingData';

export interface DriftSeriesPart {
  n: number;
  variance: number;
  /** Distinct event dates in order, undated last (null); counts[k] patients have dates[k]. */
  dates: (string | null)[];
  counts: number[];
  p: Float64Array;
  y: Uint8Array;
}

/** Date order, ties in the cohort's line order (a stable counting sort over the few distinct dates). */
export function driftSeriesOf(score: RunScoreInput, all: CohortData): DriftSeriesPart {
  // The patients the run analysed: rows with a gap in a column the score reads are left out, as in the run.
  const data = completeCaseData(score, all);
  const risk = predictedRisk(score, data);
  const groups = new Map<string | null, number>();
  for (let i = 0; i < data.n; i++) groups.set(data.eventDate[i], (groups.get(data.eventDate[i]) ?? 0) + 1);
  const dates = [...groups.keys()].sort((a, b) => (a === b ? 0 : a === null ? 1 : b === null ? -1 : a < b ? -1 : 1));
  const counts = dates.map((d) => groups.get(d)!);
  const start = new Map<string | null, number>();
  let at = 0;
  dates.forEach((d, k) => {
    start.set(d, at);
    at += counts[k];
  });
  const p = new Float64Array(data.n);
  const y = new Uint8Array(data.n);
  let variance = 0;
  for (let i = 0; i < data.n; i++) {
    const t = start.get(data.eventDate[i])!;
    start.set(data.eventDate[i], t + 1);
    p[t] = risk[i];
    y[t] = data.outcome[i];
    variance += risk[i] * (1 - risk[i]);
  }
  return { n: data.n, variance, dates, counts, p, y };
}

const bytesOf = (a: Float64Array | Uint8Array) => Buffer.from(a.buffer, a.byteOffset, a.byteLength);

/** Stores a series once; a second writer (another run of the same pair, another process) changes nothing. */
export async function storeDriftSeries(
  query: Query,
  scoreVersionId: string,
  cohortVersionId: string,
  runId: string | null,
  s: DriftSeriesPart,
): Promise<void> {
  await query(
    `INSERT INTO drift_series (score_version_id, cohort_version_id, run_id, n, variance, dates, counts, p, y)
     VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9) ON CONFLICT (score_version_id, cohort_version_id) DO NOTHING`,
    [scoreVersionId, cohortVersionId, runId, s.n, s.variance, s.dates, s.counts, bytesOf(s.p), bytesOf(s.y)],
  );
}

/** Stored series of a score version on the given cohort versions (those with none are missing from the map). */
export async function readDriftSeries(
  query: Query,
  scoreVersionId: string,
  cohortVersionIds: string[],
): Promise<Map<string, DriftSeriesPart>> {
  const rows = await query(
    'SELECT cohort_version_id, n, variance, dates, counts, p, y FROM drift_series WHERE score_version_id = $1 AND cohort_version_id = ANY($2::uuid[])',
    [scoreVersionId, cohortVersionIds],
  );
  const out = new Map<string, DriftSeriesPart>();
  for (const r of rows) {
    const pb = r.p as Buffer;
    const yb = r.y as Buffer;
    out.set(r.cohort_version_id as string, {
      n: Number(r.n),
      variance: Number(r.variance),
      dates: r.dates as (string | null)[],
      counts: (r.counts as number[]).map(Number),
      // Copied out of the pg buffer so the float view is aligned.
      p: new Float64Array(pb.buffer.slice(pb.byteOffset, pb.byteOffset + pb.byteLength)),
      y: new Uint8Array(yb),
    });
  }
  return out;
}
