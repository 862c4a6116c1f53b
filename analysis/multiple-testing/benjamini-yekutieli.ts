import { stepUp, type MultipleTestingResult } from './benjamini-hochberg.js';

/**
 * Benjamini–Yekutieli (2001) step-up: BH with q divided by c(m) = Σ_{i=1}^m 1/i, which controls
 * the FDR under any dependence. Offered because per-assessor tests that share leave-one-out panel
 * means need not satisfy BH's positive-dependence condition (methods notes §6.2). Adjusted values
 * as R's p.adjust(p, "BY"); null p-values are left out of m.
 *
 * @see Benjamini, Y. & Yekutieli, D. (2001) Annals of Statistics 29, 1165–1188.
 * @example benjaminiYekutieli([0.01, 0.04, 0.03]).adjusted // [0.055, 0.07333333333333333, 0.07333333333333333]
 */
export function benjaminiYekutieli(pValues: readonly (number | null)[], fdrLevel = 0.05): MultipleTestingResult {
  return stepUp(pValues, fdrLevel, harmonicNumber);
}

function harmonicNumber(m: number): number {
  let sum = 0;
  for (let i = 1; i <= m; i++) sum += 1 / i;
  return sum;
}
