/**
 * Cumulative observed minus expected outcomes per patient in time order (a VLAD-type curve):
 *   C_t = Σ_{i ≤ t} (y_i − p_i).  Rising = more events than the score predicts.
 * Source: Lovegrove J, Valencia O, Treasure T, Sherlaw-Johnson C, Gallivan S (1997). Monitoring the results of cardiac
 * surgery by variable life-adjusted display. Lancet 350:1128–1130 (they plot expected − observed, "lives saved";
 * we plot O − E so that upward means worse, consistent with O/E > 1).
 * Choice: the plotted series is downsampled (every k-th patient plus the last); the final value is exact.
 */

export interface CumulativeOE {
  n: number;
  observed: number;
  expected: number;
  finalValue: number;
  series: { index: number; value: number }[];
}

export function observedMinusExpected(p: ArrayLike<number>, y: ArrayLike<number>, maxPoints = 2000): CumulativeOE {
  const n = p.length;
  const step = Math.max(1, Math.ceil(n / maxPoints));
  let o = 0;
  let e = 0;
  const series: { index: number; value: number }[] = [];
  for (let t = 0; t < n; t++) {
    o += y[t];
    e += p[t];
    if (t % step === 0 || t === n - 1) series.push({ index: t, value: o - e });
  }
  return { n, observed: o, expected: e, finalValue: o - e, series };
}
