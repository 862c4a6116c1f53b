/**
 * Longer than 400 lines: the factorisation and its solves share one index layout of the packed
 * blocks and border; kept together so that a change to the layout is made in one place.
 *
 * Cholesky factorisation of a symmetric positive-definite "block-arrow" matrix:
 *
 *     [ A_1              C_1 ]
 *     [      A_2         C_2 ]
 *     [           ...    ... ]
 *     [ C_1ᵀ C_2ᵀ ...    A_B ]
 *
 * Independent diagonal blocks A_b (random effects nested in one level of a grouping factor,
 * e.g. everything belonging to one session) plus a dense border A_B (effects crossed with
 * that factor). L = [[L_b, 0], [W_bᵀ, L_B]] with L_b L_bᵀ = A_b, W_b = L_b⁻¹ C_b and
 * L_B L_Bᵀ = A_B − Σ W_bᵀ W_b. Cost Σ_b (n_b³/3 + n_b² n_B + n_b n_B²) + n_B³/3 instead of q³/3.
 *
 * Why one file of about 450 lines: the factorisation, the solves and the inverse diagonal all
 * index the same packed storage (BlockArrowWorkspace: blocks, W_b rows, border), and that
 * index arithmetic is the part most easily got wrong; kept together it is written and checked
 * once. Each function is short and stands alone.
 */
import { backSolveTransposeInPlace, choleskyInPlace, forwardSolveInPlace } from './dense.js';

export interface BlockArrowLayout {
  /** Size n_b of each diagonal block, in global order. */
  blockSizes: number[];
  /** Global position of the first row of each block. */
  blockOffsets: number[];
  /** Size n_B of the border (last rows in the global order). */
  borderSize: number;
  /** Global position of the first border row (= Σ n_b). */
  borderOffset: number;
  /** Total size q. */
  size: number;
}

/** Matrix values before factorisation and the factor after: filled by the caller, overwritten by factorBlockArrowInPlace. */
export interface BlockArrowWorkspace {
  layout: BlockArrowLayout;
  /** Row-major n_b×n_b: A_b, then L_b. */
  blocks: Float64Array[];
  /** Row-major n_b×n_B: C_b, then W_b = L_b⁻¹ C_b. */
  couplings: Float64Array[];
  /** Row-major n_B×n_B: A_B, then L_B. */
  border: Float64Array;
  /** Work arrays of blockArrowInverseDiagonalAll, made on its first call with this workspace. */
  inverseScratch?: InverseScratch;
}

export function makeBlockArrowLayout(blockSizes: number[], borderSize: number): BlockArrowLayout {
  const blockOffsets: number[] = [];
  let offset = 0;
  for (const size of blockSizes) {
    blockOffsets.push(offset);
    offset += size;
  }
  return { blockSizes, blockOffsets, borderSize, borderOffset: offset, size: offset + borderSize };
}

export function makeBlockArrowWorkspace(layout: BlockArrowLayout): BlockArrowWorkspace {
  return {
    layout,
    blocks: layout.blockSizes.map((size) => new Float64Array(size * size)),
    couplings: layout.blockSizes.map((size) => new Float64Array(size * layout.borderSize)),
    border: new Float64Array(layout.borderSize * layout.borderSize),
  };
}

/** Factorises in place; returns false when the matrix is not positive definite. */
export function factorBlockArrowInPlace(workspace: BlockArrowWorkspace): boolean {
  const { layout, blocks, couplings, border } = workspace;
  const nB = layout.borderSize;
  const nonzero = new Int32Array(nB);
  const denseRows = new Int32Array(Math.max(0, ...layout.blockSizes));
  for (let b = 0; b < blocks.length; b++) {
    const nb = layout.blockSizes[b];
    const block = blocks[b];
    if (!choleskyInPlace(block, nb)) return false;
    if (nB === 0) continue;
    const coupling = couplings[b];
    // W_b = L_b⁻¹ C_b row by row: row_i = (C_i − Σ_{k<i} L_ik row_k) / L_ii (contiguous updates,
    // zero multipliers skipped: the first, largest nested term has a diagonal block).
    for (let i = 0; i < nb; i++) {
      const rowI = i * nB;
      for (let k = 0; k < i; k++) {
        const lik = block[i * nb + k];
        if (lik === 0) continue;
        const rowK = k * nB;
        for (let j = 0; j < nB; j++) coupling[rowI + j] -= lik * coupling[rowK + j];
      }
      const inverseDiagonal = 1 / block[i * nb + i];
      for (let j = 0; j < nB; j++) coupling[rowI + j] *= inverseDiagonal;
    }
    // Schur complement update of the lower triangle of the border: A_B -= W_bᵀ W_b, one rank-1
    // update per row of W_b; mostly-zero rows (those of a nested term) over their nonzeros only,
    // the dense rows four at a time (one pass over the border per four rows instead of four).
    let nDense = 0;
    for (let k = 0; k < nb; k++) {
      const rowK = k * nB;
      let count = 0;
      for (let i = 0; i < nB; i++) if (coupling[rowK + i] !== 0) nonzero[count++] = i;
      if (count === 0) continue;
      if (2 * count > nB) {
        denseRows[nDense++] = rowK;
        continue;
      }
      for (let a = 0; a < count; a++) {
        const i = nonzero[a];
        const wki = coupling[rowK + i];
        const rowI = i * nB;
        for (let b2 = 0; b2 <= a; b2++) {
          const j = nonzero[b2];
          border[rowI + j] -= wki * coupling[rowK + j];
        }
      }
    }
    let d = 0;
    for (; d + 4 <= nDense; d += 4) {
      const r0 = denseRows[d];
      const r1 = denseRows[d + 1];
      const r2 = denseRows[d + 2];
      const r3 = denseRows[d + 3];
      for (let i = 0; i < nB; i++) {
        const a0 = coupling[r0 + i];
        const a1 = coupling[r1 + i];
        const a2 = coupling[r2 + i];
        const a3 = coupling[r3 + i];
        const rowI = i * nB;
        for (let j = 0; j <= i; j++) {
          border[rowI + j] -= a0 * coupling[r0 + j] + a1 * coupling[r1 + j] + a2 * coupling[r2 + j] + a3 * coupling[r3 + j];
        }
      }
    }
    for (; d < nDense; d++) {
      const rowK = denseRows[d];
      for (let i = 0; i < nB; i++) {
        const wki = coupling[rowK + i];
        if (wki === 0) continue;
        const rowI = i * nB;
        for (let j = 0; j <= i; j++) border[rowI + j] -= wki * coupling[rowK + j];
      }
    }
  }
  return nB === 0 || choleskyInPlace(border, nB);
}

/** Sum of log of squared diagonal of L = log det of the factored matrix. */
export function blockArrowLogDeterminant(workspace: BlockArrowWorkspace): number {
  const { layout, blocks, border } = workspace;
  let sum = 0;
  for (let b = 0; b < blocks.length; b++) {
    const nb = layout.blockSizes[b];
    for (let i = 0; i < nb; i++) sum += Math.log(blocks[b][i * nb + i]);
  }
  for (let i = 0; i < layout.borderSize; i++) sum += Math.log(border[i * layout.borderSize + i]);
  return 2 * sum;
}

/** x ← L⁻¹ x for one column of a row-major q×m right-hand side (column `column`, stride m). */
export function blockArrowForwardSolve(workspace: BlockArrowWorkspace, x: Float64Array, column = 0, stride = 1): void {
  const { layout, blocks, couplings, border } = workspace;
  const nB = layout.borderSize;
  const borderStart = column + layout.borderOffset * stride;
  for (let b = 0; b < blocks.length; b++) {
    const nb = layout.blockSizes[b];
    const start = column + layout.blockOffsets[b] * stride;
    forwardSolveInPlace(blocks[b], nb, x, start, stride);
    if (nB === 0) continue;
    const coupling = couplings[b];
    for (let k = 0; k < nb; k++) {
      const xk = x[start + k * stride];
      if (xk === 0) continue;
      const rowK = k * nB;
      for (let i = 0; i < nB; i++) x[borderStart + i * stride] -= coupling[rowK + i] * xk;
    }
  }
  if (nB > 0) forwardSolveInPlace(border, nB, x, borderStart, stride);
}

/**
 * X ← L⁻¹ X for all m columns of a row-major q×m right-hand side at once: the same arithmetic as
 * m calls of blockArrowForwardSolve, but every update runs along a contiguous row of X.
 */
export function blockArrowForwardSolveRows(workspace: BlockArrowWorkspace, x: Float64Array, m: number): void {
  const { layout, blocks, couplings, border } = workspace;
  const nB = layout.borderSize;
  const borderStart = layout.borderOffset * m;
  for (let b = 0; b < blocks.length; b++) {
    const nb = layout.blockSizes[b];
    const start = layout.blockOffsets[b] * m;
    lowerSolveRows(blocks[b], nb, x, start, m);
    if (nB === 0) continue;
    const coupling = couplings[b];
    for (let k = 0; k < nb; k++) {
      const rowK = start + k * m;
      for (let i = 0; i < nB; i++) {
        const c = coupling[k * nB + i];
        if (c === 0) continue;
        const target = borderStart + i * m;
        for (let col = 0; col < m; col++) x[target + col] -= c * x[rowK + col];
      }
    }
  }
  if (nB > 0) lowerSolveRows(border, nB, x, borderStart, m);
}

/** X ← L⁻ᵀ X for all m columns of a row-major q×m right-hand side at once (see blockArrowForwardSolveRows). */
export function blockArrowBackSolveRows(workspace: BlockArrowWorkspace, x: Float64Array, m: number): void {
  const { layout, blocks, couplings, border } = workspace;
  const nB = layout.borderSize;
  const borderStart = layout.borderOffset * m;
  if (nB > 0) upperSolveRows(border, nB, x, borderStart, m);
  for (let b = 0; b < blocks.length; b++) {
    const nb = layout.blockSizes[b];
    const start = layout.blockOffsets[b] * m;
    if (nB > 0) {
      const coupling = couplings[b];
      for (let k = 0; k < nb; k++) {
        const rowK = start + k * m;
        for (let i = 0; i < nB; i++) {
          const c = coupling[k * nB + i];
          if (c === 0) continue;
          const source = borderStart + i * m;
          for (let col = 0; col < m; col++) x[rowK + col] -= c * x[source + col];
        }
      }
    }
    upperSolveRows(blocks[b], nb, x, start, m);
  }
}

/** Rows start..start+n of the row-major ·×m matrix X ← L⁻¹ X (L lower triangular n×n). */
function lowerSolveRows(l: Float64Array, n: number, x: Float64Array, start: number, m: number): void {
  for (let i = 0; i < n; i++) {
    const rowI = start + i * m;
    for (let k = 0; k < i; k++) {
      const lik = l[i * n + k];
      if (lik === 0) continue;
      const rowK = start + k * m;
      for (let col = 0; col < m; col++) x[rowI + col] -= lik * x[rowK + col];
    }
    const inverse = 1 / l[i * n + i];
    for (let col = 0; col < m; col++) x[rowI + col] *= inverse;
  }
}

/** Rows start..start+n of X ← L⁻ᵀ X (L lower triangular n×n). */
function upperSolveRows(l: Float64Array, n: number, x: Float64Array, start: number, m: number): void {
  for (let i = n - 1; i >= 0; i--) {
    const rowI = start + i * m;
    for (let k = i + 1; k < n; k++) {
      const lki = l[k * n + i];
      if (lki === 0) continue;
      const rowK = start + k * m;
      for (let col = 0; col < m; col++) x[rowI + col] -= lki * x[rowK + col];
    }
    const inverse = 1 / l[i * n + i];
    for (let col = 0; col < m; col++) x[rowI + col] *= inverse;
  }
}

/** x ← L⁻ᵀ x for one column of a row-major q×m right-hand side. */
export function blockArrowBackSolve(workspace: BlockArrowWorkspace, x: Float64Array, column = 0, stride = 1): void {
  const { layout, blocks, couplings, border } = workspace;
  const nB = layout.borderSize;
  const borderStart = column + layout.borderOffset * stride;
  if (nB > 0) backSolveTransposeInPlace(border, nB, x, borderStart, stride);
  for (let b = 0; b < blocks.length; b++) {
    const nb = layout.blockSizes[b];
    const start = column + layout.blockOffsets[b] * stride;
    if (nB > 0) {
      const coupling = couplings[b];
      for (let k = 0; k < nb; k++) {
        const rowK = k * nB;
        let sum = 0;
        for (let i = 0; i < nB; i++) sum += coupling[rowK + i] * x[borderStart + i * stride];
        x[start + k * stride] -= sum;
      }
    }
    backSolveTransposeInPlace(blocks[b], nb, x, start, stride);
  }
}

/**
 * Diagonal entry i of the inverse of the factored matrix, (L Lᵀ)⁻¹_ii = ‖L⁻¹ e_i‖²,
 * touching only the block that holds position i and the border.
 */
export function blockArrowInverseDiagonal(workspace: BlockArrowWorkspace, position: number): number {
  const { layout, blocks, couplings, border } = workspace;
  const nB = layout.borderSize;
  if (position >= layout.borderOffset) {
    const local = new Float64Array(nB);
    local[position - layout.borderOffset] = 1;
    forwardSolveInPlace(border, nB, local);
    return sumOfSquares(local);
  }
  let b = 0;
  while (b + 1 < blocks.length && layout.blockOffsets[b + 1] <= position) b++;
  const nb = layout.blockSizes[b];
  const local = new Float64Array(nb);
  local[position - layout.blockOffsets[b]] = 1;
  forwardSolveInPlace(blocks[b], nb, local);
  let total = sumOfSquares(local);
  if (nB > 0) {
    const borderPart = new Float64Array(nB);
    const coupling = couplings[b];
    for (let k = 0; k < nb; k++) {
      for (let i = 0; i < nB; i++) borderPart[i] -= coupling[k * nB + i] * local[k];
    }
    forwardSolveInPlace(border, nB, borderPart);
    total += sumOfSquares(borderPart);
  }
  return total;
}

function sumOfSquares(values: Float64Array): number {
  let sum = 0;
  for (const value of values) sum += value * value;
  return sum;
}

/**
 * Every diagonal entry of the inverse of the factored matrix, (L Lᵀ)⁻¹_ii = ‖L⁻¹ e_i‖², in the
 * global order. Block rows: ‖L_b⁻¹ e_i‖² + ‖L_B⁻¹ W_bᵀ L_b⁻¹ e_i‖²; border rows: ‖L_B⁻¹ e_i‖².
 * Cost about half of one factorisation.
 */
export function blockArrowInverseDiagonalAll(workspace: BlockArrowWorkspace, out: Float64Array): void {
  const { layout, blocks, couplings, border } = workspace;
  const nB = layout.borderSize;
  const scratch = inverseScratch(workspace);
  // (L_B⁻¹)ᵀ: row j holds column j of L_B⁻¹ (entries j..n_B−1), contiguous.
  const borderInverseT = lowerTriangularInverseTransposed(border, nB, scratch.borderT);
  for (let i = 0; i < nB; i++) out[layout.borderOffset + i] = sumOfSquaresFrom(borderInverseT, i * nB + i, i * nB + nB);
  for (let b = 0; b < blocks.length; b++) {
    const nb = layout.blockSizes[b];
    const offset = layout.blockOffsets[b];
    const blockInverseT = lowerTriangularInverseTransposed(blocks[b], nb, scratch.block);
    for (let i = 0; i < nb; i++) out[offset + i] = sumOfSquaresFrom(blockInverseT, i * nb + i, i * nb + nb);
    if (nB === 0) continue;
    // The border part of row i is ‖L_B⁻¹ W_bᵀ L_b⁻¹ e_i‖² = ‖Σ_{k ≥ i} (L_b⁻¹)_ki g_k‖² with
    // g_k = L_B⁻¹ w_k for the rows w_k of W_b; g_k = Σ_j w_kj (column j of L_B⁻¹) costs
    // n_B per nonzero of w_k, and the rows of nested terms have few (a session's row of
    // assessor:session touches that session and its products only).
    const coupling = couplings[b];
    const g = scratch.g;
    g.fill(0, 0, nb * nB);
    // Dense rows four at a time (one pass over L_B⁻¹ per four rows), the others nonzero by nonzero.
    let nDense = 0;
    for (let k = 0; k < nb; k++) {
      const rowK = k * nB;
      let count = 0;
      for (let j = 0; j < nB; j++) if (coupling[rowK + j] !== 0) count++;
      if (2 * count > nB) {
        scratch.denseRows[nDense++] = rowK;
        continue;
      }
      for (let j = 0; j < nB; j++) {
        const w = coupling[rowK + j];
        if (w === 0) continue;
        const column = j * nB;
        for (let r = j; r < nB; r++) g[rowK + r] += w * borderInverseT[column + r];
      }
    }
    let d = 0;
    for (; d + 4 <= nDense; d += 4) {
      const r0 = scratch.denseRows[d];
      const r1 = scratch.denseRows[d + 1];
      const r2 = scratch.denseRows[d + 2];
      const r3 = scratch.denseRows[d + 3];
      for (let j = 0; j < nB; j++) {
        const w0 = coupling[r0 + j];
        const w1 = coupling[r1 + j];
        const w2 = coupling[r2 + j];
        const w3 = coupling[r3 + j];
        const column = j * nB;
        for (let r = j; r < nB; r++) {
          const value = borderInverseT[column + r];
          g[r0 + r] += w0 * value;
          g[r1 + r] += w1 * value;
          g[r2 + r] += w2 * value;
          g[r3 + r] += w3 * value;
        }
      }
    }
    for (; d < nDense; d++) {
      const rowK = scratch.denseRows[d];
      for (let j = 0; j < nB; j++) {
        const w = coupling[rowK + j];
        if (w === 0) continue;
        const column = j * nB;
        for (let r = j; r < nB; r++) g[rowK + r] += w * borderInverseT[column + r];
      }
    }
    const combined = scratch.combined;
    for (let i = 0; i < nb; i++) {
      combined.fill(0, 0, nB);
      for (let k = i; k < nb; k++) {
        const y = blockInverseT[i * nb + k];
        if (y === 0) continue;
        const rowK = k * nB;
        for (let r = 0; r < nB; r++) combined[r] += y * g[rowK + r];
      }
      let sum = 0;
      for (let r = 0; r < nB; r++) sum += combined[r] * combined[r];
      out[offset + i] += sum;
    }
  }
}

/** Work arrays of blockArrowInverseDiagonalAll, kept in the workspace (it is called once per gradient). */
export interface InverseScratch {
  borderT: Float64Array;
  denseRows: Int32Array;
  block: Float64Array;
  g: Float64Array;
  combined: Float64Array;
}

function inverseScratch(workspace: BlockArrowWorkspace): InverseScratch {
  let scratch = workspace.inverseScratch;
  if (!scratch) {
    const { blockSizes, borderSize } = workspace.layout;
    const largest = Math.max(0, ...blockSizes);
    scratch = {
      borderT: new Float64Array(borderSize * borderSize),
      denseRows: new Int32Array(largest),
      block: new Float64Array(largest * largest),
      g: new Float64Array(largest * borderSize),
      combined: new Float64Array(borderSize),
    };
    workspace.inverseScratch = scratch;
  }
  return scratch;
}

/**
 * The transpose of the inverse of a lower-triangular n×n matrix L (row-major), into `result`:
 * row j is L⁻¹ e_j (zero before j), found by forward substitution along contiguous rows.
 */
function lowerTriangularInverseTransposed(l: Float64Array, n: number, result: Float64Array): Float64Array {
  result.fill(0, 0, n * n);
  for (let j = 0; j < n; j++) {
    const row = j * n;
    result[row + j] = 1 / l[j * n + j];
    for (let i = j + 1; i < n; i++) {
      const li = i * n;
      let sum = 0;
      for (let k = j; k < i; k++) sum += l[li + k] * result[row + k];
      result[row + i] = -sum / l[li + i];
    }
  }
  return result;
}

function sumOfSquaresFrom(values: Float64Array, from: number, to: number): number {
  let sum = 0;
  for (let i = from; i < to; i++) sum += values[i] * values[i];
  return sum;
}
