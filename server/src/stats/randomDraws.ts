/**
 * Random draws for multiple imputation from a uniform stream (mulberry32 in bootstrap.ts): standard normal by the
 * Box–Muller transform, gamma by Marsaglia & Tsang's squeeze method, and chi-square as 2·Gamma(df/2).
 * Sources: Box GEP, Muller ME (1958) Ann Math Stat 29:610–611; Marsaglia G, Tsang WW (2000) A simple method for
 * generating gamma variables, ACM Trans Math Software 26:363–372 (shape < 1 boosted by U^(1/shape), their §6).
 * Choice: one normal per call (the second Box–Muller value is dropped) so a stream's use never depends on call order.
 */
export type Uniform = () => number;

export function normalDraw(rand: Uniform): number {
  // 1 − U keeps the log finite: mulberry32 can return exactly 0
  return Math.sqrt(-2 * Math.log(1 - rand())) * Math.cos(2 * Math.PI * rand());
}

export function gammaDraw(shape: number, rand: Uniform): number {
  if (shape < 1) return gammaDraw(shape + 1, rand) * Math.pow(1 - rand(), 1 / shape);
  const d = shape - 1 / 3;
  const c = 1 / Math.sqrt(9 * d);
  for (;;) {
    let x: number;
    let v: number;
    do {
      x = normalDraw(rand);
      v = 1 + c * x;
    } while (v <= 0);
    v = v * v * v;
    const u = 1 - rand();
    if (u < 1 - 0.0331 * x * x * x * x) return d * v;
    if (Math.log(u) < 0.5 * x * x + d * (1 - v + Math.log(v))) return d * v;
  }
}

export function chiSquareDraw(df: number, rand: Uniform): number {
  return 2 * gammaDraw(df / 2, rand);
}
