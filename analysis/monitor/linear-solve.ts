/**
 * Dense Gaussian elimination with partial pivoting for the small Markov-chain systems
 * (I − Q) x = 1 of the ARL computations (≤ a few hundred states). Kept here rather than in
 * analysis/linalg because it is private to this folder and needs no matrix library.
 * Returns null when the system is numerically singular (e.g. a side of a CUSUM that never signals).
 */
export function solveDense(matrix: Float64Array[], rightHandSide: Float64Array): Float64Array | null {
  const n = rightHandSide.length;
  const a = matrix.map((row) => Float64Array.from(row));
  const b = Float64Array.from(rightHandSide);
  for (let col = 0; col < n; col++) {
    let pivotRow = col;
    let pivotAbs = Math.abs(a[col][col]);
    for (let row = col + 1; row < n; row++) {
      const v = Math.abs(a[row][col]);
      if (v > pivotAbs) {
        pivotAbs = v;
        pivotRow = row;
      }
    }
    if (!(pivotAbs > 1e-14)) return null;
    if (pivotRow !== col) {
      [a[col], a[pivotRow]] = [a[pivotRow], a[col]];
      [b[col], b[pivotRow]] = [b[pivotRow], b[col]];
    }
    const pivot = a[col];
    for (let row = col + 1; row < n; row++) {
      const target = a[row];
      const factor = target[col] / pivot[col];
      if (factor === 0) continue;
      for (let k = col; k < n; k++) target[k] -= factor * pivot[k];
      b[row] -= factor * b[col];
    }
  }
  const x = new Float64Array(n);
  for (let row = n - 1; row >= 0; row--) {
    let s = b[row];
    const r = a[row];
    for (let k = row + 1; k < n; k++) s -= r[k] * x[k];
    x[row] = s / r[row];
  }
  return x;
}
