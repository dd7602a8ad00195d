// The two engine functions taken from simple-statistics (quantileSorted as R's type-7 quantile, gammaln as ln Γ),
// checked against R 4.2 (Debian's /usr/bin/Rscript: stats::quantile(type = 7), base::lgamma, stats::pchisq) — run here.
// DEVELOPERS.md ("Statistics engine") lists what else simple-statistics offers and why the engine does not use it.
import { describe, expect, it } from 'vitest';
import { chiSquareUpper, logGamma } from '../../server/src/stats/distributions';
import { quantileType7 } from '../../server/src/stats/sortedCohort';
import { mulberry32 } from '../../server/src/stats/bootstrap';
import { relErr, runR, skipR } from './tools';

const json =
  'toJ <- function(x) cat(paste0("{", paste0("\\"", names(x), "\\":", sapply(x, function(v) paste0("[", paste(format(v, digits = 17), collapse = ","), "]")), collapse = ","), "}\\n"))';

describe.skipIf(skipR)('functions taken from simple-statistics, against R', () => {
  it('quantileType7 equals quantile(type = 7) on seeded data of odd and even length, ties included', () => {
    const r = mulberry32(71);
    const probs = [0, 0.025, 0.1, 0.25, 0.5, 0.75, 0.9, 0.975, 1, 0.333];
    for (const n of [1, 2, 7, 10, 101]) {
      const xs = Array.from({ length: n }, () => Math.round(r() * 50) / 10).sort((a, b) => a - b);
      const ref = runR(`${json}; toJ(list(q = unname(quantile(c(${xs.join(',')}), c(${probs.join(',')}), type = 7))))`);
      probs.forEach((p, i) =>
        expect(Math.abs(quantileType7(Float64Array.from(xs), p) - ref.q[i]), `n=${n} p=${p}`).toBeLessThan(1e-14),
      ); // R quantile type 7 [ref]
    }
  });

  it('logGamma equals lgamma to 1e-14 (relative), and the chi-square tail built on it equals pchisq', () => {
    const xs = [0.5, 1, 1.5, 2.5, 3.7, 4, 12.2, 50.5, 150];
    const ref = runR(
      `${json}; x <- c(${xs.join(',')}); toJ(list(lg = lgamma(x), q = pchisq(c(3.84, 15.5, 0.2, 40), df = c(1, 8, 3, 20), lower.tail = FALSE)))`,
    );
    xs.forEach((x, i) =>
      expect(Math.abs(logGamma(x) - ref.lg[i]) / Math.max(1, Math.abs(ref.lg[i])), `x=${x}`).toBeLessThan(1e-14),
    ); // R lgamma [ref]
    [
      [3.84, 1],
      [15.5, 8],
      [0.2, 3],
      [40, 20],
    ].forEach(([x, df], i) => expect(relErr(chiSquareUpper(x, df), ref.q[i]), `χ² ${x} df ${df}`).toBeLessThan(1e-12)); // R pchisq [ref]
  });
});
