/**
 * Observation-level projections through a factor (criterion-factor.ts): x ↦ P x, the residual of
 * x after the mixed-model solution with x as the response, and from it the residual cross
 * products the average information and the exact Hessian read.
 */
import { blockArrowBackSolve, blockArrowForwardSolve } from '../linalg/block-arrow.js';
import { backSolveTransposeInPlace, forwardSolveInPlace } from '../linalg/dense.js';
import type { CriterionFactor, CriterionSetting } from './criterion-factor.js';

export interface ResidualProjector {
  /**
   * From the factor: s_k = ‖Z_kᵀ r‖² and the matrix w_kᵀ P w_l with r = P y and
   * w_k = Z_k Z_kᵀ r (one projection per term).
   */
  residualCrossProducts(factor: CriterionFactor): { termSquares: Float64Array; products: Float64Array };
}

export function makeResidualProjector(setting: CriterionSetting): ResidualProjector {
  const { frame } = setting;
  const n = frame.nObservations;
  const p = frame.nFixed;
  const q = frame.layout.size;
  const nTheta = frame.terms.length;
  // Each observation's position in every term, and work vectors.
  const positions = new Int32Array(n * nTheta);
  for (let i = 0; i < n; i++) for (let k = 0; k < nTheta; k++) positions[i * nTheta + k] = frame.positionOf[k][frame.terms[k].index[i]];
  const residuals = new Float64Array(n);
  const projected = new Float64Array(n);
  const zSums = new Float64Array(q);
  const solveRhs = new Float64Array(q);
  const betaW = new Float64Array(p);

  /** out ← P w from the factor (w and out may be the same array). */
  function projectInPlace(factor: CriterionFactor, w: Float64Array, out: Float64Array): void {
    const { lambda, arrow, fixedRows, rx } = factor;
    const width = p + 1;
    zSums.fill(0);
    betaW.fill(0);
    for (let i = 0; i < n; i++) {
      const value = w[i];
      for (let k = 0; k < nTheta; k++) zSums[positions[i * nTheta + k]] += value;
      betaW[0] += value;
      const fixedColumn = frame.fixedIndex[i];
      if (fixedColumn > 0) betaW[fixedColumn] += value;
    }
    for (let i = 0; i < q; i++) solveRhs[i] = lambda[i] * zSums[i];
    blockArrowForwardSolve(arrow, solveRhs);
    for (let c = 0; c < p; c++) {
      let sum = betaW[c];
      for (let i = 0; i < q; i++) sum -= fixedRows[i * width + c] * solveRhs[i];
      betaW[c] = sum;
    }
    forwardSolveInPlace(rx, p, betaW);
    backSolveTransposeInPlace(rx, p, betaW);
    for (let i = 0; i < q; i++) {
      let sum = solveRhs[i];
      for (let c = 0; c < p; c++) sum -= fixedRows[i * width + c] * betaW[c];
      solveRhs[i] = sum;
    }
    blockArrowBackSolve(arrow, solveRhs);
    for (let i = 0; i < q; i++) solveRhs[i] *= lambda[i];
    for (let i = 0; i < n; i++) {
      let fitted = betaW[0];
      const fixedColumn = frame.fixedIndex[i];
      if (fixedColumn > 0) fitted += betaW[fixedColumn];
      for (let k = 0; k < nTheta; k++) fitted += solveRhs[positions[i * nTheta + k]];
      out[i] = w[i] - fitted;
    }
  }

  function residualCrossProducts(factor: CriterionFactor): { termSquares: Float64Array; products: Float64Array } {
    for (let i = 0; i < n; i++) residuals[i] = frame.response[i] - frame.responseCentre;
    projectInPlace(factor, residuals, residuals);
    zSums.fill(0);
    for (let i = 0; i < n; i++) for (let k = 0; k < nTheta; k++) zSums[positions[i * nTheta + k]] += residuals[i];
    const termTotals = Float64Array.from(zSums);
    const termSquares = new Float64Array(nTheta);
    for (let i = 0; i < q; i++) termSquares[frame.termOfPosition[i]] += termTotals[i] * termTotals[i];
    const w = Array.from({ length: nTheta }, (_, k) => Float64Array.from(residuals, (_, i) => termTotals[positions[i * nTheta + k]]));
    const products = new Float64Array(nTheta * nTheta);
    for (let l = 0; l < nTheta; l++) {
      projectInPlace(factor, w[l], projected);
      for (let k = 0; k <= l; k++) {
        let sum = 0;
        for (let i = 0; i < n; i++) sum += w[k][i] * projected[i];
        products[k * nTheta + l] = sum;
        products[l * nTheta + k] = sum;
      }
    }
    return { termSquares, products };
  }

  return { residualCrossProducts };
}
