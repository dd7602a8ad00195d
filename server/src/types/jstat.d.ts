// The part of jstat (MIT, no types of its own) the engine uses: Student t quantiles for prediction intervals.
// A CommonJS module: import its default export (module.exports) and take jStat from it.
declare module 'jstat' {
  const jstat: { jStat: { studentt: { inv(p: number, df: number): number; cdf(x: number, df: number): number } } };
  export default jstat;
}
