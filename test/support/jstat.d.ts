/** The part of jstat 1.9.6 (npm, no bundled types) that the tests use as a reference library. */
declare module 'jstat' {
  interface Distribution {
    cdf(x: number, ...params: number[]): number;
    pdf(x: number, ...params: number[]): number;
    inv(p: number, ...params: number[]): number;
  }
  interface Discrete {
    cdf(k: number, n: number, p: number): number;
    pdf(k: number, n: number, p: number): number;
  }
  const jStat: { chisquare: Distribution; normal: Distribution; beta: Distribution; binomial: Discrete };
  export default jStat;
}
