/**
 * Regularised incomplete gamma functions P(a, x) and Q(a, x) to about 1e-15 relative accuracy:
 * series for x < a + 1, continued fraction (modified Lentz) otherwise (Press et al., Numerical
 * Recipes, 3rd ed., section 6.2). jstat's version uses a fixed, short number of terms.
 */
import jstatModule from 'jstat';

const { jStat } = jstatModule;

const TINY = 1e-300;
const TOLERANCE = 1e-16;
const MAX_TERMS = 100_000;

function logPrefactor(a: number, x: number): number {
  return -x + a * Math.log(x) - jStat.gammaln(a);
}

function lowerSeries(a: number, x: number): number {
  let ap = a;
  let term = 1 / a;
  let sum = term;
  for (let n = 0; n < MAX_TERMS; n++) {
    ap += 1;
    term *= x / ap;
    sum += term;
    if (Math.abs(term) < Math.abs(sum) * TOLERANCE) break;
  }
  return sum * Math.exp(logPrefactor(a, x));
}

function upperContinuedFraction(a: number, x: number): number {
  let b = x + 1 - a;
  let c = 1 / TINY;
  let d = 1 / b;
  let h = d;
  for (let i = 1; i < MAX_TERMS; i++) {
    const an = -i * (i - a);
    b += 2;
    d = an * d + b;
    if (Math.abs(d) < TINY) d = TINY;
    c = b + an / c;
    if (Math.abs(c) < TINY) c = TINY;
    d = 1 / d;
    const delta = d * c;
    h *= delta;
    if (Math.abs(delta - 1) < TOLERANCE) break;
  }
  return Math.exp(logPrefactor(a, x)) * h;
}

export function regularizedGammaP(a: number, x: number): number {
  if (Number.isNaN(x) || !(a > 0)) return Number.NaN;
  if (x <= 0) return 0;
  if (x === Infinity) return 1;
  return x < a + 1 ? lowerSeries(a, x) : 1 - upperContinuedFraction(a, x);
}

export function regularizedGammaQ(a: number, x: number): number {
  if (Number.isNaN(x) || !(a > 0)) return Number.NaN;
  if (x <= 0) return 1;
  if (x === Infinity) return 0;
  return x < a + 1 ? 1 - lowerSeries(a, x) : upperContinuedFraction(a, x);
}

/** Inverse of P(a, x) in x: jstat's inverse as the start, then Newton steps on the accurate P. */
export function inverseRegularizedGammaP(probability: number, a: number): number {
  if (!(probability > 0)) return 0;
  if (!(probability < 1)) return Infinity;
  let x = jStat.gammapinv(probability, a);
  if (!(x > 0) || !Number.isFinite(x)) x = a;
  for (let iteration = 0; iteration < 50; iteration++) {
    const error = regularizedGammaP(a, x) - probability;
    const density = Math.exp((a - 1) * Math.log(x) - x - jStat.gammaln(a));
    if (!(density > 0) || !Number.isFinite(density)) break;
    let next = x - error / density;
    if (next <= 0) next = x / 2;
    if (Math.abs(next - x) <= 1e-15 * x) {
      x = next;
      break;
    }
    x = next;
  }
  return x;
}
