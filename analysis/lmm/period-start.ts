/**
 * Start values for the period model from the balanced expected mean squares of the model's
 * own terms (methods notes §1.6 with the assessor × product × session interaction pooled into
 * the residual, as the model has no such term):
 *   E[MS_res] = σ²_E,  E[MS_AP] = σ²_E + nSσ²_AP,  E[MS_AS] = σ²_E + nPσ²_AS,  E[MS_PS] = σ²_E + nAσ²_PS,
 *   E[MS_A] = σ²_E + nSσ²_AP + nPσ²_AS + nPSσ²_A,  E[MS_S] = σ²_E + nPσ²_AS + nAσ²_PS + nAPσ²_S.
 * In a balanced design with all estimates positive this is the REML solution, so the optimiser
 * only confirms it; otherwise (or with missing cells) it is a start value, clipped away from 0.
 * Returns θ in the order assessor, session, assessor:product, assessor:session[, product:session]
 * (null when the residual line has no degrees of freedom or no spread).
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

interface PeriodAnova {
  balanced: boolean;
  ms: { P: number; AP: number; PS: number };
  df: { P: number; AP: number; PS: number; residual: number };
  /** assessor, session, assessor:product, assessor:session[, product:session] */
  variances: number[];
  residual: number;
}

function periodAnova(cells: PeriodCells, withProductSession: boolean): PeriodAnova | null {
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
  // Unbalanced data: the same formulas on the cells present, with the mean replicate count
  // (an approximation, good enough for a start value).
  let present = 0;
  for (const count of counts) if (count > 0) present++;
  if (present === 0) return null;
  const balanced = present === total && counts.every((count) => count === counts[0]);
  const replicates = n / present;
  const cellMean = Float64Array.from(sums, (sum, cell) => (counts[cell] > 0 ? sum / counts[cell] : Number.NaN));
  const mA = new Float64Array(A);
  const mP = new Float64Array(P);
  const mS = new Float64Array(S);
  const mAP = new Float64Array(A * P);
  const mAS = new Float64Array(A * S);
  const mPS = new Float64Array(P * S);
  const nA = new Float64Array(A);
  const nP = new Float64Array(P);
  const nS = new Float64Array(S);
  const nAP = new Float64Array(A * P);
  const nAS = new Float64Array(A * S);
  const nPS = new Float64Array(P * S);
  let grand = 0;
  for (let a = 0; a < A; a++) {
    for (let p = 0; p < P; p++) {
      for (let s = 0; s < S; s++) {
        const value = cellMean[(a * P + p) * S + s];
        if (Number.isNaN(value)) continue;
        grand += value / present;
        mA[a] += value;
        nA[a]++;
        mP[p] += value;
        nP[p]++;
        mS[s] += value;
        nS[s]++;
        mAP[a * P + p] += value;
        nAP[a * P + p]++;
        mAS[a * S + s] += value;
        nAS[a * S + s]++;
        mPS[p * S + s] += value;
        nPS[p * S + s]++;
      }
    }
  }
  const divide = (means: Float64Array, counts: Float64Array): void => means.forEach((sum, index) => (means[index] = counts[index] > 0 ? sum / counts[index] : grand));
  divide(mA, nA);
  divide(mP, nP);
  divide(mS, nS);
  divide(mAP, nAP);
  divide(mAS, nAS);
  divide(mPS, nPS);
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
  const variances = [vA, vS, vAP, vAS];
  if (withProductSession) variances.push(vPS);
  return {
    balanced,
    ms: { P: ssP / (P - 1), AP: msAP, PS: msPS },
    df: { P: P - 1, AP: dfAP, PS: dfPS, residual: dfResidual },
    variances,
    residual,
  };
}

export function periodMomentStart(cells: PeriodCells, withProductSession: boolean): number[] | null {
  const anova = periodAnova(cells, withProductSession) ?? incompletePeriodAnova(cells, withProductSession);
  if (!anova) return null;
  return anova.variances.map((variance) => Math.sqrt(Math.max(variance / anova.residual, 1e-4)));
}

/**
 * Start values when the crossed formulas above fail (products rotating between sessions, absent
 * assessors): σ²_E from the replicates within assessor × product × session cells (pure error),
 * each two-way term's mean square on the cells present (df = cells − rows − columns + 1) with the
 * mean number of ratings per present level as its coefficient. Only a start value: it has to put
 * the optimiser near the answer, not be the answer.
 */
function incompletePeriodAnova(cells: PeriodCells, withProductSession: boolean): { variances: number[]; residual: number } | null {
  const { nAssessors: A, nProducts: P, nSessions: S } = cells;
  const n = cells.values.length;
  let grand = 0;
  for (let i = 0; i < n; i++) grand += cells.values[i];
  grand /= n;
  const margin = (size: number, key: (i: number) => number): { mean: Float64Array; count: Float64Array; present: number } => {
    const mean = new Float64Array(size);
    const count = new Float64Array(size);
    for (let i = 0; i < n; i++) {
      const index = key(i);
      mean[index] += cells.values[i];
      count[index]++;
    }
    let present = 0;
    for (let index = 0; index < size; index++) {
      if (count[index] > 0) {
        mean[index] /= count[index];
        present++;
      }
    }
    return { mean, count, present };
  };
  const a = margin(A, (i) => cells.assessor[i]);
  const p = margin(P, (i) => cells.product[i]);
  const s = margin(S, (i) => cells.session[i]);
  const ap = margin(A * P, (i) => cells.assessor[i] * P + cells.product[i]);
  const as = margin(A * S, (i) => cells.assessor[i] * S + cells.session[i]);
  const ps = margin(P * S, (i) => cells.product[i] * S + cells.session[i]);
  const aps = margin(A * P * S, (i) => (cells.assessor[i] * P + cells.product[i]) * S + cells.session[i]);
  let ssWithin = 0;
  let ssA = 0;
  let ssS = 0;
  let ssAP = 0;
  let ssAS = 0;
  let ssPS = 0;
  for (let i = 0; i < n; i++) {
    const ai = cells.assessor[i];
    const pi = cells.product[i];
    const si = cells.session[i];
    const mA = a.mean[ai] - grand;
    const mP = p.mean[pi] - grand;
    const mS = s.mean[si] - grand;
    ssWithin += (cells.values[i] - aps.mean[(ai * P + pi) * S + si]) ** 2;
    ssA += mA * mA;
    ssS += mS * mS;
    ssAP += (ap.mean[ai * P + pi] - grand - mA - mP) ** 2;
    ssAS += (as.mean[ai * S + si] - grand - mA - mS) ** 2;
    ssPS += (ps.mean[pi * S + si] - grand - mP - mS) ** 2;
  }
  const dfWithin = n - aps.present;
  const dfA = a.present - 1;
  const dfS = s.present - 1;
  const dfAP = ap.present - a.present - p.present + 1;
  const dfAS = as.present - a.present - s.present + 1;
  const dfPS = ps.present - p.present - s.present + 1;
  if (!(dfWithin > 0 && ssWithin > 0 && dfA > 0 && dfS > 0 && dfAP > 0 && dfAS > 0) || (withProductSession && !(dfPS > 0))) return null;
  const residual = ssWithin / dfWithin;
  const perAP = n / ap.present;
  const perAS = n / as.present;
  const perPS = n / ps.present;
  const vAP = (ssAP / dfAP - residual) / perAP;
  const vAS = (ssAS / dfAS - residual) / perAS;
  const vPS = withProductSession ? (ssPS / dfPS - residual) / perPS : 0;
  const vA = (ssA / dfA - residual - perAP * vAP - perAS * vAS) / (n / a.present);
  const vS = (ssS / dfS - residual - perAS * vAS - perPS * vPS) / (n / s.present);
  const variances = [vA, vS, vAP, vAS];
  if (withProductSession) variances.push(vPS);
  return { variances, residual };
}



export interface BalancedPeriodSolution {
  /** The exact ANOVA θ (all components positive). */
  theta: number[];
  F: number;
  numDf: number;
  denDf: number;
}

/**
 * Balanced period design (every assessor × product × session cell with the same count) with all
 * ANOVA estimates positive: the REML solution and the product test in closed form. The product
 * contrasts have variance ∝ E[MS_PS] + E[MS_AP] − E[MS_res] (∝ E[MS_AP] without product:session),
 * so F = MS_P / (MS_PS + MS_AP − MS_res) with Satterthwaite's (1946) df
 * (MS_PS + MS_AP − MS_res)² / (MS_PS²/df_PS + MS_AP²/df_AP + MS_res²/df_res) (methods notes §1.6);
 * without product:session, F = MS_P / MS_AP on df_AP. Null otherwise.
 */
export function balancedPeriodSolution(cells: PeriodCells, withProductSession: boolean): BalancedPeriodSolution | null {
  const anova = periodAnova(cells, withProductSession);
  if (!anova || !anova.balanced) return null;
  const { ms, df, variances, residual } = anova;
  if (!variances.every((variance) => variance > 0)) return null;
  const theta = variances.map((variance) => Math.sqrt(variance / residual));
  if (!withProductSession) return { theta, F: ms.P / ms.AP, numDf: df.P, denDf: df.AP };
  const denominator = ms.PS + ms.AP - residual;
  if (!(denominator > 0)) return null;
  const denDf = denominator ** 2 / (ms.PS ** 2 / df.PS + ms.AP ** 2 / df.AP + residual ** 2 / df.residual);
  return { theta, F: ms.P / denominator, numDf: df.P, denDf };
}

