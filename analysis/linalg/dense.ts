/**
 * Small dense kernels on row-major Float64Array matrices. Hand-written because the
 * mixed-model criterion calls them thousands of times per fit on 1×1 to ~100×100
 * matrices, where allocation-free loops beat a general matrix library.
 */
import { EigenvalueDecomposition, Matrix } from 'ml-matrix';

/**
 * In-place Cholesky factorisation A = L Lᵀ of a symmetric positive-definite n×n matrix
 * (row-major, only the lower triangle is read). The lower triangle is overwritten by L and
 * the strict upper triangle is zeroed. Returns false when a pivot is not positive.
 */
export function choleskyInPlace(a: Float64Array, n: number, offset = 0): boolean {
  for (let j = 0; j < n; j++) {
    const rowJ = offset + j * n;
    let diagonal = a[rowJ + j];
    for (let k = 0; k < j; k++) diagonal -= a[rowJ + k] * a[rowJ + k];
    if (!(diagonal > 0)) return false;
    const ljj = Math.sqrt(diagonal);
    a[rowJ + j] = ljj;
    for (let i = j + 1; i < n; i++) {
      const rowI = offset + i * n;
      let sum = a[rowI + j];
      for (let k = 0; k < j; k++) sum -= a[rowI + k] * a[rowJ + k];
      a[rowI + j] = sum / ljj;
    }
    for (let k = j + 1; k < n; k++) a[rowJ + k] = 0;
  }
  return true;
}

/** Solves L x = b in place (L lower triangular, row-major n×n); b has stride `stride` from `bOffset`. */
export function forwardSolveInPlace(l: Float64Array, n: number, b: Float64Array, bOffset = 0, stride = 1, lOffset = 0): void {
  for (let i = 0; i < n; i++) {
    const row = lOffset + i * n;
    let sum = b[bOffset + i * stride];
    for (let k = 0; k < i; k++) sum -= l[row + k] * b[bOffset + k * stride];
    b[bOffset + i * stride] = sum / l[row + i];
  }
}

/** Solves Lᵀ x = b in place (L lower triangular, row-major n×n). */
export function backSolveTransposeInPlace(l: Float64Array, n: number, b: Float64Array, bOffset = 0, stride = 1, lOffset = 0): void {
  for (let i = n - 1; i >= 0; i--) {
    let sum = b[bOffset + i * stride];
    for (let k = i + 1; k < n; k++) sum -= l[lOffset + k * n + i] * b[bOffset + k * stride];
    b[bOffset + i * stride] = sum / l[lOffset + i * n + i];
  }
}

/** log det(A) = 2 Σ log L_ii from a Cholesky factor. */
export function choleskyLogDeterminant(l: Float64Array, n: number, offset = 0): number {
  let sum = 0;
  for (let i = 0; i < n; i++) sum += Math.log(l[offset + i * n + i]);
  return 2 * sum;
}

/** Inverse of a symmetric positive-definite matrix from its Cholesky factor: (L Lᵀ)⁻¹, row-major. */
export function inverseFromCholesky(l: Float64Array, n: number): Float64Array {
  const inverse = new Float64Array(n * n);
  const column = new Float64Array(n);
  for (let j = 0; j < n; j++) {
    column.fill(0);
    column[j] = 1;
    forwardSolveInPlace(l, n, column);
    backSolveTransposeInPlace(l, n, column);
    for (let i = 0; i < n; i++) inverse[i * n + j] = column[i];
  }
  return inverse;
}

/** Quadratic form vᵀ A w for a row-major n×n matrix. */
export function bilinearForm(v: ArrayLike<number>, a: ArrayLike<number>, w: ArrayLike<number>, n: number): number {
  let sum = 0;
  for (let i = 0; i < n; i++) {
    let row = 0;
    for (let j = 0; j < n; j++) row += a[i * n + j] * w[j];
    sum += v[i] * row;
  }
  return sum;
}

export interface SymmetricEigen {
  /** Eigenvalues in decreasing order (as R's eigen()). */
  values: number[];
  /** vectors[m] is the unit eigenvector of values[m] (typed: one element kind for compiled callers). */
  vectors: Float64Array[];
}

/** Eigen-decomposition of a symmetric matrix (row-major n×n), eigenvalues in decreasing order. */
export function symmetricEigen(a: ArrayLike<number>, n: number): SymmetricEigen {
  const rows: number[][] = [];
  for (let i = 0; i < n; i++) {
    const row: number[] = [];
    for (let j = 0; j < n; j++) row.push(0.5 * (a[i * n + j] + a[j * n + i]));
    rows.push(row);
  }
  const decomposition = new EigenvalueDecomposition(new Matrix(rows), { assumeSymmetric: true });
  const values = decomposition.realEigenvalues;
  const vectorMatrix = decomposition.eigenvectorMatrix;
  const order = values.map((_, index) => index).sort((x, y) => values[y] - values[x]);
  return {
    values: order.map((index) => values[index]),
    vectors: order.map((index) => Float64Array.from(vectorMatrix.getColumn(index))),
  };
}
