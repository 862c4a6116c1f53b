/**
 * Benjamini–Hochberg (1995) step-up procedure controlling the false discovery rate.
 *
 * Order the m p-values p_(1) ≤ … ≤ p_(m); reject the k smallest, k = max{i : p_(i) ≤ i·q/m}.
 * Adjusted values ("q-values" in the flag evidence): p̃_(i) = min_{j ≥ i} min(1, m·p_(j)/j),
 * as R's p.adjust(p, "BH"). null p-values (tests that were not defined) are left out of m and
 * come back as null, so a family can be passed as it is.
 *
 * @see Benjamini, Y. & Hochberg, Y. (1995) JRSS B 57, 289–300; methods notes §6.2.
 * @example benjaminiHochberg([0.01, 0.04, 0.03], 0.05).adjusted // [0.03, 0.04, 0.04]
 */
export interface MultipleTestingResult {
  /** Adjusted p-values in input order; null where the input p-value was null. */
  adjusted: (number | null)[];
  /** true where the hypothesis is rejected at the FDR level q; false for null inputs. */
  rejected: boolean[];
  /** Number of defined p-values (the m of the procedure). */
  nTests: number;
}

export function benjaminiHochberg(pValues: readonly (number | null)[], fdrLevel = 0.05): MultipleTestingResult {
  return stepUp(pValues, fdrLevel, 1);
}

/**
 * Shared step-up: `dependencyFactor` is 1 for BH and Σ_{i=1}^m 1/i for Benjamini–Yekutieli.
 * Exported for the BY module only.
 */
export function stepUp(pValues: readonly (number | null)[], fdrLevel: number, dependencyFactor: number | ((m: number) => number)): MultipleTestingResult {
  if (!(fdrLevel > 0 && fdrLevel < 1)) throw new Error('stepUp: the FDR level must lie strictly between 0 and 1');
  const defined: { p: number; index: number }[] = [];
  pValues.forEach((p, index) => {
    if (p === null) return;
    if (!(p >= 0 && p <= 1)) throw new Error(`stepUp: p-value ${p} at position ${index} is not a probability`);
    defined.push({ p, index });
  });
  const m = defined.length;
  const factor = typeof dependencyFactor === 'function' ? dependencyFactor(m) : dependencyFactor;
  const adjusted: (number | null)[] = pValues.map(() => null);
  const rejected = pValues.map(() => false);
  if (m === 0) return { adjusted, rejected, nTests: 0 };
  defined.sort((a, b) => a.p - b.p);
  // Adjusted values: running minimum from the largest p downwards.
  let runningMin = 1;
  for (let rank = m; rank >= 1; rank--) {
    const item = defined[rank - 1];
    // Same operation order as R's p.adjust ((c m / i) p) so values agree to the last bit or so.
    runningMin = Math.min(runningMin, ((factor * m) / rank) * item.p);
    adjusted[item.index] = runningMin;
  }
  // Rejections: the k smallest with k the largest rank passing p_(i) <= i q / (m factor).
  let k = 0;
  for (let rank = m; rank >= 1; rank--) {
    if (defined[rank - 1].p <= (rank * fdrLevel) / (m * factor)) {
      k = rank;
      break;
    }
  }
  for (let rank = 1; rank <= k; rank++) rejected[defined[rank - 1].index] = true;
  return { adjusted, rejected, nTests: m };
}
