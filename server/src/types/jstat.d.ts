// The part of jstat (MIT, no types of its own) the engine uses: Student t quantiles for prediction intervals.
declare module 'jstat' {
  export const jStat: { studentt: { inv(p: number, df: number): number; cdf(x: number, df: number): number } };
}
