// Hosmer–Lemeshow df for external validation, by seeded simulation: outcomes drawn from the score's own risks (a
// perfectly calibrated score), 10 groups, many replicates. With df = G the 5% test rejects about 5% of the time;
// with df = G − 2 it rejects about twice as often (here 4.9% and 10.6%), which is why the engine uses G for a
// published score.
import { describe, expect, it } from 'vitest';
import { mulberry32 } from '../../../server/src/stats/bootstrap';
import { chiSquareUpper } from '../../../server/src/stats/distributions';
import { hosmerLemeshow } from '../../../server/src/stats/hosmerLemeshow';
import { sortCohort } from '../../../server/src/stats/sortedCohort';

const REPS = 2000;
const N = 500;

function rejectionRates(seed: number) {
  const rand = mulberry32(seed);
  let rejectG = 0;
  let rejectG2 = 0;
  for (let r = 0; r < REPS; r++) {
    const p = new Float64Array(N);
    const y = new Uint8Array(N);
    for (let i = 0; i < N; i++) {
      // risks from a logit-normal spread (mean logit −1.5, SD 1), outcomes drawn from those risks
      const z = Math.sqrt(-2 * Math.log(1 - rand())) * Math.cos(2 * Math.PI * rand());
      p[i] = 1 / (1 + Math.exp(-(-1.5 + z)));
      y[i] = rand() < p[i] ? 1 : 0;
    }
    const hl = hosmerLemeshow(sortCohort(p, y), 10);
    if (hl.pValue < 0.05) rejectG++;
    if (chiSquareUpper(hl.statistic, hl.groups - 2) < 0.05) rejectG2++;
  }
  return { g: rejectG / REPS, g2: rejectG2 / REPS };
}

describe('Hosmer–Lemeshow df for a perfectly calibrated external score (seeded simulation)', () => {
  const rates = rejectionRates(20261203);
  // Monte Carlo SE of a 5% rate over 2,000 replicates: sqrt(0.05 · 0.95 / 2000) ≈ 0.0049; allow 3 SE
  const mcse = Math.sqrt((0.05 * 0.95) / REPS);

  it('df = G rejects at about the nominal 5%', () => {
    expect(hosmerLemeshow(sortCohort(Float64Array.of(0.1, 0.2, 0.3), Uint8Array.of(0, 1, 0)), 10).df).toBe(3);
    expect(Math.abs(rates.g - 0.05)).toBeLessThan(3 * mcse);
  });

  it('df = G − 2 would reject well above 5%', () => {
    expect(rates.g2 - 0.05).toBeGreaterThan(5 * mcse);
  });
});
