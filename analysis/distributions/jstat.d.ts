// jstat ships no types; only the functions wrapped in this folder are declared.
declare module 'jstat' {
  interface Dist2 { cdf(x: number, a: number, b: number): number; inv(p: number, a: number, b: number): number; pdf(x: number, a: number, b: number): number }
  interface Dist1 { cdf(x: number, a: number): number; inv(p: number, a: number): number; pdf(x: number, a: number): number }
  export const jStat: {
    ibeta(x: number, a: number, b: number): number;
    ibetainv(p: number, a: number, b: number): number;
    gammap(a: number, x: number): number;
    gammapinv(p: number, a: number): number;
    gammaln(x: number): number;
    lowRegGamma(a: number, x: number): number;
    normal: Dist2;
    studentt: Dist1;
    centralF: Dist2;
    chisquare: Dist1;
  };
  const _default: { jStat: typeof jStat };
  export default _default;
}
