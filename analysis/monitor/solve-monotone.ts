/**
 * Root of log f(x) = log target for an increasing f on [low, high] by the Illinois variant of
 * regula falsi (Dowell & Jarratt 1971 [REC]); log ARL is close to linear in the limit width,
 * so a handful of ARL evaluations suffice instead of the ~25 of bisection.
 */
export function solveIncreasing(f: (x: number) => number, target: number, low: number, high: number, tolerance = 1e-7): number {
  const g = (x: number): number => Math.log(f(x)) - Math.log(target);
  let a = low;
  let b = high;
  let ga = g(a);
  let gb = g(b);
  if (!(ga < 0)) return a;
  if (!(gb > 0) || !Number.isFinite(gb)) {
    // Infinite ARL at the upper end (singular chain): fall back to bisection until finite.
    while (b - a > tolerance && !(Number.isFinite(gb) && gb > 0)) {
      const middle = (a + b) / 2;
      const gm = g(middle);
      if (gm < 0) {
        a = middle;
        ga = gm;
      } else {
        b = middle;
        gb = gm;
      }
    }
  }
  let side = 0;
  for (let iteration = 0; iteration < 100; iteration++) {
    const c = (a * gb - b * ga) / (gb - ga);
    const gc = g(c);
    if (Math.abs(gc) < 1e-10 || b - a < tolerance) return c;
    if (gc < 0) {
      a = c;
      ga = gc;
      if (side === -1) gb /= 2;
      side = -1;
    } else {
      b = c;
      gb = gc;
      if (side === 1) ga /= 2;
      side = 1;
    }
  }
  return (a + b) / 2;
}
