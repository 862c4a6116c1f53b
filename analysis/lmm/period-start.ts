/**
 * Start values for the period model from the balanced expected mean squares of the model's
 * own terms (methods notes §1.6 with the assessor × product × session interaction pooled into
 * the residual, as the model has no such term):
 *   E[MS_res] = σ²_E,  E[MS_AP] = σ²_E + nSσ²_AP,  E[MS_AS] = σ²_E + nPσ²_AS,  E[MS_PS] = σ²_E + nAσ²_PS,
 *   E[MS_A] = σ²_E + nSσ²_AP + nPσ²_AS + nPSσ²_A,  E[MS_S] = σ²_E + nPσ²_AS + nAσ²_PS + nAPσ²_S.
 * In a balanced design with all estimates positive this is the REML solution, so the optimiser
 * only confirms it; otherwise (or with missing cells) it is a start value, clipped away from 0.
 * Returns θ in the order assessor, session, assessor:product, assessor:session[, product:session],
 * or null when some assessor × product × session cell is missing or replicate counts differ.
 */
export interface PeriodCells {
  values: ArrayLike<number>;
  assessor: ArrayLike<number>;
  product: ArrayLike<number>;
  session: ArrayLike<number>;
  nAssessors: number;
  nProducts: number;
  nSessions: number;
}

export function periodMomentStart(cells: PeriodCells, withProductSession: boolean): number[] | null {
  const { nAssessors: A, nProducts: P, nSessions: S } = cells;
  const total = A * P * S;
  const counts = new Int32Array(total);
  const sums = new Float64Array(total);
  const n = cells.values.length;
  for (let i = 0; i < n; i++) {
    const cell = (cells.assessor[i] * P + cells.product[i]) * S + cells.session[i];
    counts[cell]++;
    sums[cell] += cells.values[i];
  }
  const replicates = counts[0];
  if (replicates === 0 || counts.some((count) => count !== replicates)) return null;
  const cellMean = Float64Array.from(sums, (sum) => sum / replicates);
  const mA = new Float64Array(A);
  const mP = new Float64Array(P);
  const mS = new Float64Array(S);
  const mAP = new Float64Array(A * P);
  const mAS = new Float64Array(A * S);
  const mPS = new Float64Array(P * S);
  let grand = 0;
  for (let a = 0; a < A; a++) {
    for (let p = 0; p < P; p++) {
      for (let s = 0; s < S; s++) {
        const value = cellMean[(a * P + p) * S + s];
        grand += value / total;
        mA[a] += value / (P * S);
        mP[p] += value / (A * S);
        mS[s] += value / (A * P);
        mAP[a * P + p] += value / S;
        mAS[a * S + s] += value / P;
        mPS[p * S + s] += value / A;
      }
    }
  }
  const sumSquares = (values: Float64Array, centre: (index: number) => number): number => {
    let sum = 0;
    values.forEach((value, index) => (sum += (value - centre(index)) ** 2));
    return sum;
  };
  const r = replicates;
  const ssA = r * P * S * sumSquares(mA, () => grand);
  const ssS = r * A * P * sumSquares(mS, () => grand);
  const ssAP = r * S * sumSquares(mAP, (index) => mA[Math.floor(index / P)] + mP[index % P] - grand);
  const ssAS = r * P * sumSquares(mAS, (index) => mA[Math.floor(index / S)] + mS[index % S] - grand);
  const ssPS = r * A * sumSquares(mPS, (index) => mP[Math.floor(index / S)] + mS[index % S] - grand);
  let ssTotal = 0;
  for (let i = 0; i < n; i++) ssTotal += (cells.values[i] - grand) ** 2;
  const ssP = r * A * S * sumSquares(mP, () => grand);
  const dfA = A - 1;
  const dfS = S - 1;
  const dfAP = (A - 1) * (P - 1);
  const dfAS = (A - 1) * (S - 1);
  const dfPS = (P - 1) * (S - 1);
  const ssResidual = ssTotal - ssA - ssP - ssS - ssAP - ssAS - (withProductSession ? ssPS : 0);
  const dfResidual = n - 1 - dfA - (P - 1) - dfS - dfAP - dfAS - (withProductSession ? dfPS : 0);
  if (!(dfResidual > 0) || !(ssResidual > 0)) return null;
  const residual = ssResidual / dfResidual;
  const msAP = ssAP / dfAP;
  const msAS = ssAS / dfAS;
  const msPS = withProductSession ? ssPS / dfPS : residual;
  const vAP = (msAP - residual) / (r * S);
  const vAS = (msAS - residual) / (r * P);
  const vPS = withProductSession ? (msPS - residual) / (r * A) : 0;
  const vA = (ssA / dfA - residual - r * S * vAP - r * P * vAS) / (r * P * S);
  const vS = (ssS / dfS - residual - r * P * vAS - r * A * vPS) / (r * A * P);
  const theta = (variance: number): number => Math.sqrt(Math.max(variance / residual, 1e-4));
  const start = [theta(vA), theta(vS), theta(vAP), theta(vAS)];
  if (withProductSession) start.push(theta(vPS));
  return start;
}
