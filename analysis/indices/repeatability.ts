import { fUpperTail } from '../distributions/index.js';
import { assessorAnova, type AssessorAnova } from './discrimination.js';
import type { CellTable } from './cell-table.js';
import type { IndexReason } from './types.js';

export interface RepeatabilityTest {
  /** s²_a: pooled within-cell variance of the assessor. */
  meanSquare: number | null;
  df: number;
  /** s²_(−a): pooled within-cell variance of the rest of the panel, on `restDf` df. */
  restMeanSquare: number | null;
  restDf: number;
  /** s_a / s_(−a). */
  sdRatio: number | null;
  /** F = s²_a / s²_(−a), upper tail on (ν_a, ν_(−a)): poorer repeatability than the rest. */
  F: number | null;
  pValue: number | null;
  reasons: IndexReason[];
}

/**
 * Repeatability against the rest of the panel (methods §2.3): variance-ratio F test of the
 * assessor's pooled replicate variance against the others' pooled replicate variance.
 * Needs ν_a ≥ 2 (methods' minimum) and a rest of panel with replicate spread.
 * Caution (Box 1953): the variance-ratio test is sensitive to non-normality; read p as a screen.
 */
export function repeatabilityTest(table: CellTable, assessor: string, own: AssessorAnova = assessorAnova(table, assessor)): RepeatabilityTest {
  let restSumOfSquares = 0;
  let restDf = 0;
  for (const other of table.assessors) {
    if (other === assessor) continue;
    restSumOfSquares += table.withinSumOfSquares.get(other)!;
    restDf += table.withinDf.get(other)!;
  }
  const restMeanSquare = restDf > 0 ? restSumOfSquares / restDf : null;
  const base = { meanSquare: own.withinMeanSquare, df: own.withinDf, restMeanSquare, restDf };
  const none = { sdRatio: null, F: null, pValue: null };
  if (own.withinDf < 2 || restDf < 1) return { ...base, ...none, reasons: ['no-replicates'] };
  if (!((restMeanSquare as number) > 0)) return { ...base, ...none, reasons: ['no-spread'] };
  const F = (own.withinMeanSquare as number) / (restMeanSquare as number);
  return { ...base, sdRatio: Math.sqrt(F), F, pValue: fUpperTail(F, own.withinDf, restDf), reasons: [] };
}
