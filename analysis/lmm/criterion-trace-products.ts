/**
 * ‖δ_kl I − T_kl‖²_F for every pair of terms k, l (T the random-effects block of the inverse of
 * the spherical mixed-model matrix), from a factor (criterion-factor.ts): the trace terms of the
 * exact Hessian of the criterion (criterion-second-order.ts).
 */
import { blockArrowForwardSolveRows, makeBlockArrowLayout } from '../linalg/block-arrow.js';
import type { CriterionFactor } from './criterion-factor.js';
import type { ModelFrame } from './model-frame.js';

/** The first `size` rows of the row-major ·×m matrix X ← L⁻¹ X (L lower triangular size×size), as a one-block arrow. */
function lowerSolveRowsLocal(l: Float64Array, size: number, x: Float64Array, m: number): void {
  const single = { layout: makeBlockArrowLayout([size], 0), blocks: [l], couplings: [new Float64Array(0)], border: new Float64Array(0) };
  blockArrowForwardSolveRows(single, x, m);
}

/**
 * ‖δ_kl I − T_kl‖²_F per pair of terms, T the random-effects block of the inverse of the
 * spherical mixed-model matrix. With L⁻¹ = [[L_b⁻¹, 0], [N_b, L_B⁻¹]],
 * N_b = −L_B⁻¹ W_bᵀ L_b⁻¹: T = KᵀK + blockdiag(L_b⁻ᵀ L_b⁻¹), K the border rows of L⁻¹ stacked
 * (REML) on the rows of R_X⁻ᵀ (L⁻ᵀ R_ZX)ᵀ, so no q×q solve is done and T is never stored.
 */
export function traceProductsFromFactor(frame: ModelFrame, factor: CriterionFactor, fixedPart: Float64Array | null): Float64Array {
  const { layout, nFixed: p } = frame;
  const q = layout.size;
  const nB = layout.borderSize;
  const nTheta = frame.terms.length;
  const { arrow, lambda } = factor;
  const nK = nB + (fixedPart ? p : 0);
  const k = new Float64Array(nK * q);
  const blockInverses: Float64Array[] = [];
  const blockOf = new Int32Array(q).fill(-1);
  for (let b = 0; b < layout.blockSizes.length; b++) {
    const nb = layout.blockSizes[b];
    const offset = layout.blockOffsets[b];
    blockOf.fill(b, offset, offset + nb);
    // L_b⁻¹ (row r, column i at r·nb + i), then L_b⁻ᵀ L_b⁻¹ (lower triangle).
    const inverse = new Float64Array(nb * nb);
    for (let i = 0; i < nb; i++) inverse[i * nb + i] = 1;
    lowerSolveRowsLocal(arrow.blocks[b], nb, inverse, nb);
    const gram = new Float64Array(nb * nb);
    for (let i = 0; i < nb; i++) {
      for (let j = 0; j <= i; j++) {
        let sum = 0;
        for (let r = i; r < nb; r++) sum += inverse[r * nb + i] * inverse[r * nb + j];
        gram[i * nb + j] = sum;
      }
    }
    blockInverses.push(gram);
    const coupling = arrow.couplings[b];
    for (let r = 0; r < nb; r++) {
      for (let border = 0; border < nB; border++) {
        const c = coupling[r * nB + border];
        if (c === 0) continue;
        const row = border * q + offset;
        for (let i = 0; i <= r; i++) k[row + i] -= c * inverse[r * nb + i];
      }
    }
  }
  for (let border = 0; border < nB; border++) k[border * q + layout.borderOffset + border] = 1;
  if (nB > 0) lowerSolveRowsLocal(arrow.border, nB, k, q);
  // Column i of K contiguous (q×nK), so each T_ij is one short dot product.
  const columns = new Float64Array(q * nK);
  for (let r = 0; r < nB; r++) for (let i = 0; i < q; i++) columns[i * nK + r] = k[r * q + i];
  if (fixedPart) for (let i = 0; i < q; i++) for (let c = 0; c < p; c++) columns[i * nK + nB + c] = fixedPart[i * p + c];
  const traceProducts = new Float64Array(nTheta * nTheta);
  let smallest = Infinity;
  for (let i = 0; i < q; i++) if (lambda[i] > 0) smallest = Math.min(smallest, lambda[i]);
  if (smallest < 1e-2) {
    // Entry by entry: δ_ij − T_ij loses only ε/θ² relative where T_kk ≈ I (θ_k small).
    for (let i = 0; i < q; i++) {
      const termI = frame.termOfPosition[i];
      const baseI = i * nK;
      const blockI = blockOf[i];
      for (let j = 0; j <= i; j++) {
        const baseJ = j * nK;
        let t = 0;
        for (let r = 0; r < nK; r++) t += columns[baseI + r] * columns[baseJ + r];
        if (blockI >= 0 && blockOf[j] === blockI) {
          const offset = layout.blockOffsets[blockI];
          t += blockInverses[blockI][(i - offset) * layout.blockSizes[blockI] + j - offset];
        }
        const value = (i === j ? 1 : 0) - t;
        const termJ = frame.termOfPosition[j];
        traceProducts[termI * nTheta + termJ] += value * value;
        if (i !== j) traceProducts[termJ * nTheta + termI] += value * value;
      }
    }
    return traceProducts;
  }
  // Otherwise in nK×nK pieces (relative error about ε/θ⁴, negligible for θ ≥ 10⁻²): with
  // B = I − blockdiag(L_b⁻ᵀ L_b⁻¹), ‖(B − KᵀK)_kl‖² = ‖B_kl‖² − 2⟨B_kl, (KᵀK)_kl⟩ + ⟨S_k, S_l⟩,
  // S_k = K_k K_kᵀ over the columns of term k (‖K_kᵀ K_l‖² = tr(S_k S_l)).
  const grams = Array.from({ length: nTheta }, () => new Float64Array(nK * nK));
  for (let i = 0; i < q; i++) {
    const gram = grams[frame.termOfPosition[i]];
    const base = i * nK;
    for (let r = 0; r < nK; r++) {
      const value = columns[base + r];
      if (value === 0) continue;
      for (let c = 0; c <= r; c++) gram[r * nK + c] += value * columns[base + c];
    }
  }
  for (let a = 0; a < nTheta; a++) {
    for (let b = 0; b <= a; b++) {
      let sum = 0;
      for (let r = 0; r < nK; r++) {
        for (let c = 0; c < r; c++) sum += 2 * grams[a][r * nK + c] * grams[b][r * nK + c];
        sum += grams[a][r * nK + r] * grams[b][r * nK + r];
      }
      traceProducts[a * nTheta + b] = sum;
      traceProducts[b * nTheta + a] = sum;
    }
  }
  for (let b = 0; b < layout.blockSizes.length; b++) {
    const nb = layout.blockSizes[b];
    const offset = layout.blockOffsets[b];
    for (let i = 0; i < nb; i++) {
      const termI = frame.termOfPosition[offset + i];
      const baseI = (offset + i) * nK;
      for (let j = 0; j <= i; j++) {
        const termJ = frame.termOfPosition[offset + j];
        const baseJ = (offset + j) * nK;
        let cross = 0;
        for (let r = 0; r < nK; r++) cross += columns[baseI + r] * columns[baseJ + r];
        const value = (i === j ? 1 : 0) - blockInverses[b][i * nb + j];
        const contribution = value * value - 2 * value * cross;
        traceProducts[termI * nTheta + termJ] += contribution;
        if (i !== j) traceProducts[termJ * nTheta + termI] += contribution;
      }
    }
  }
  // Border positions: B = I there.
  for (let i = layout.borderOffset; i < q; i++) {
    const term = frame.termOfPosition[i];
    let cross = 0;
    for (let r = 0; r < nK; r++) cross += columns[i * nK + r] * columns[i * nK + r];
    traceProducts[term * nTheta + term] += 1 - 2 * cross;
  }
  return traceProducts;
}
