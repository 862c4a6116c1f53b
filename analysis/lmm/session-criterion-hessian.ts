/**
 * Exact first and second derivatives of the one-session REML criterion (session-criterion.ts, methods §1.9)
 * in γ = θ², from the same cell summaries, for Newton steps (session-newton.ts) and for the
 * Satterthwaite df (session-cells-fit.ts). Notation as in session-criterion.ts; k, l ∈ {a, ap},
 * G_k = Z_kZ_kᵀ, P = H⁻¹ − H⁻¹XC⁻¹XᵀH⁻¹, q_k = yᵀPG_kPy, q_kl = yᵀPG_kPG_lPy. With ∂P/∂γ_k = −PG_kP
 * (Harville 1977, JASA 72:320):
 *
 *   ∂f/∂γ_k      = tr(PG_k) − (N − P) q_k / pwrss,
 *   ∂²f/∂γ_k∂γ_l = −tr(PG_kPG_l) + (N − P) [2 q_kl / pwrss − q_k q_l / pwrss²].
 *
 * Every G_k is a sum of outer products of cell indicators, so only Q = KᵀPK (K the N × cells
 * indicator matrix) enters. Per assessor i, D_i = KᵢᵀH⁻¹Kᵢ = diag(w_i) − (γ_a/d_i) w_iw_iᵀ
 * (Sherman–Morrison), C = Σ_i D_i, KᵀH⁻¹X stacks the D_i, so Q_ii' = δ_ii' D_i − D_iC⁻¹D_i'.
 * With v_i = D_i1 = w_i/d_i, S = Σ_i D_i², T = Σ_i D_i³ and U = Σ_i v_iv_iᵀ, the traces are
 *
 *   tr(PG_aPG_a)   = Σ_i (M_i/d_i)² − 2 Σ_i (M_i/d_i) v_iᵀC⁻¹v_i + tr((C⁻¹U)²),
 *   tr(PG_aPG_ap)  = Σ_i |v_i|² − 2 Σ_i (D_iv_i)ᵀC⁻¹v_i + tr(C⁻¹SC⁻¹U),
 *   tr(PG_apPG_ap) = Σ_i tr(D_i²) − 2 tr(C⁻¹T) + tr((C⁻¹S)²),
 *
 * and q_kl = ξ_kᵀQξ_l with the cell vectors ξ_a = t_i/d_i (each cell of assessor i) and ξ_ap = u_ij
 * (the cell sums of Py and of G_aPy). One call costs O(A·P² + P³) with P the products (a few µs for
 * 12 × 6), about as much as an evaluation of the criterion. The same pieces give ∂C⁻¹/∂γ_a = C⁻¹UC⁻¹ and
 * ∂C⁻¹/∂γ_ap = C⁻¹SC⁻¹ for the Satterthwaite df. All work arrays are allocated once.
 */
import { bilinearForm } from '../linalg/dense.js';
import type { SessionCriterion } from './session-criterion.js';

export interface SessionSecondOrder {
  /** Number of components (1 without the interaction term, else 2). */
  nComponents: number;
  /**
   * The criterion, its gradient and Hessian in γ at γ = (γ_a, γ_ap), written into `gradient`
   * and `hessian` (row-major k × k); returns the value (Infinity where not finite, and then the
   * buffers are not filled).
   */
  evaluate(gammaA: number, gammaAP: number): number;
  readonly gradient: Float64Array;
  readonly hessian: Float64Array;
  /** (γ_a, γ_ap) of the last evaluate() that was finite (NaN before any). */
  readonly lastGamma: Float64Array;
  /**
   * After evaluate(): the derivatives of h(γ) = log|H| + log|C| + pwrss/σ² at fixed σ² (the
   * unprofiled REML deviance less its σ terms), gradient and Hessian in γ into the given buffers,
   * and ∂C⁻¹/∂γ_k (cell-means coding, row-major) into `covarianceDerivatives[k]`.
   */
  fixedSigma(sigma2: number, gradient: Float64Array, hessian: Float64Array, covarianceDerivatives: Float64Array[]): void;
  /** q_k = yᵀPG_kPy of the last evaluate() (∂pwrss/∂γ_k = −q_k). */
  readonly residualQuadratics: Float64Array;
  /** C⁻¹ of the last evaluate() (cell-means coding, row-major); overwritten by the next. */
  readonly inverseC: Float64Array;
}

export function makeSessionSecondOrder(criterion: SessionCriterion): SessionSecondOrder {
  const state = criterion.state;
  const { nAssessors, nProducts: p, withInteraction, degrees } = state;
  const k = withInteraction ? 2 : 1;
  const pp = p * p;
  const inverse = new Float64Array(pp);
  const sumU = new Float64Array(pp);
  const sumS = new Float64Array(pp);
  const inverseTimesU = new Float64Array(pp);
  const inverseTimesS = new Float64Array(pp);
  const u = new Float64Array(p);
  const sumXiA = new Float64Array(p);
  const sumXiAP = new Float64Array(p);
  const gradient = new Float64Array(k);
  const hessian = new Float64Array(k * k);
  const residualQuadratics = new Float64Array(k);
  const lastGamma = new Float64Array(2).fill(Number.NaN);
  // tr(PG_k), tr(PG_kPG_l) and q_kl of the last evaluation (index 0 = a, 1 = ap; kl row-major).
  const traces = new Float64Array(2);
  const traceProducts = new Float64Array(4);
  const quadraticProducts = new Float64Array(4);
  // The sums over assessors of one evaluation (slots named at the end of the file).
  const sums = new Float64Array(SUM_COUNT);

  /** target = a b (p × p, row-major). */
  function multiply(a: Float64Array, b: Float64Array, target: Float64Array): void {
    for (let i = 0; i < p; i++) {
      for (let j = 0; j < p; j++) {
        let sum = 0;
        for (let m = 0; m < p; m++) sum += a[i * p + m] * b[m * p + j];
        target[i * p + j] = sum;
      }
    }
  }
  /** tr(a b) of p × p matrices. */
  function traceOfProduct(a: Float64Array, b: Float64Array): number {
    let sum = 0;
    for (let i = 0; i < p; i++) for (let j = 0; j < p; j++) sum += a[i * p + j] * b[j * p + i];
    return sum;
  }
  /**
   * One assessor's terms of the sums over assessors, added into `sums` (slots named at the end of
   * the file) and the p-vectors and matrices. A function of its own, so the loops compiled while
   * a year's first sessions run are short ones; called in assessor order, so the sums are added
   * up exactly as in one loop.
   */
  function addAssessor(a: number, gammaA: number): void {
    const { weight, denominator, assessorSum, residualMean } = state;
    const row = a * p;
    const d = denominator[a];
    const shrink = gammaA / d;
    // D_i = W − s w wᵀ with W = diag(w), s = γ_a/d: every piece below uses that structure
    // (O(P²) per assessor), with α = Σw², β = Σw³ and b = w∘w.
    let total = 0;
    let alpha = 0;
    let beta = 0;
    for (let j = 0; j < p; j++) {
      const wj = weight[row + j];
      total += wj;
      alpha += wj * wj;
      beta += wj * wj * wj;
    }
    let aCa = 0;
    let bCa = 0;
    let bCb = 0;
    let cCa = 0;
    let diagonalTerm = 0;
    for (let i = 0; i < p; i++) {
      let sumW = 0;
      let sumB = 0;
      for (let j = 0; j < p; j++) {
        const wj = weight[row + j];
        sumW += inverse[i * p + j] * wj;
        sumB += inverse[i * p + j] * wj * wj;
      }
      const wi = weight[row + i];
      aCa += wi * sumW;
      bCa += wi * wi * sumW;
      bCb += wi * wi * sumB;
      cCa += wi * wi * wi * sumW;
      diagonalTerm += inverse[i * p + i] * wi * wi * wi;
    }
    const d2 = d * d;
    const blockTotal = total / d;
    const vInverseV = aCa / d2;
    sums[TRACE_A] += blockTotal - vInverseV;
    sums[T_AA] += blockTotal * blockTotal - 2 * blockTotal * vInverseV;
    for (let i = 0; i < p; i++) {
      const vi = weight[row + i] / d2;
      for (let j = 0; j < p; j++) sumU[i * p + j] += vi * weight[row + j];
    }
    const xiA = assessorSum[a] / d;
    sums[Q_A] += xiA * xiA;
    sums[Q_AA] += xiA * xiA * blockTotal;
    for (let j = 0; j < p; j++) sumXiA[j] += (xiA * weight[row + j]) / d;
    if (!withInteraction) return;
    // S += D_i² = W² − s(b wᵀ + w bᵀ) + s²α w wᵀ.
    const s2alpha = shrink * shrink * alpha;
    for (let i = 0; i < p; i++) {
      const wi = weight[row + i];
      for (let j = 0; j < p; j++) {
        const wj = weight[row + j];
        sumS[i * p + j] += (i === j ? wi * wi : 0) - shrink * (wi * wi * wj + wi * wj * wj) + s2alpha * wi * wj;
      }
    }
    sums[TRACE_AP] += total - shrink * alpha;
    sums[T_APAP] += alpha - 2 * shrink * beta + s2alpha * alpha;
    // tr(C⁻¹D_i³), D³ = W³ − s(c wᵀ + w cᵀ + b bᵀ) + s²α(b wᵀ + w bᵀ) + (s²β − s³α²) w wᵀ, c = w∘w∘w.
    sums[TRACE_INVERSE_T] += diagonalTerm - shrink * (2 * cCa + bCb) + 2 * s2alpha * bCa + (shrink * shrink * beta - shrink * s2alpha * alpha) * aCa;
    // |v|² − 2 (D v)ᵀC⁻¹v with D v = (b − sα w)/d.
    sums[T_AAP] += alpha / d2 - (2 * (bCa - shrink * alpha * aCa)) / d2;
    // ξ_ap: the cell sums of Py, u_ij = w_ij (e_ij − γ_a t_i/d_i); D u = w∘u − s w (wᵀu).
    let wU = 0;
    let wUU = 0;
    for (let j = 0; j < p; j++) {
      const wj = weight[row + j];
      const uj = wj * (residualMean[row + j] - shrink * assessorSum[a]);
      u[j] = uj;
      wU += wj * uj;
      wUU += wj * uj * uj;
      sums[Q_AP] += uj * uj;
    }
    for (let j = 0; j < p; j++) sumXiAP[j] += weight[row + j] * (u[j] - shrink * wU);
    sums[Q_AAP] += (xiA * wU) / d;
    sums[Q_APAP] += wUU - shrink * wU * wU;
  }
  /** Fills traces, traceProducts, quadraticProducts and residualQuadratics after the criterion's evaluation at γ_a. */
  function pieces(gammaA: number): void {
    state.fillInverseC(inverse);
    sumU.fill(0);
    sumS.fill(0);
    sumXiA.fill(0);
    sumXiAP.fill(0);
    sums.fill(0);
    for (let a = 0; a < nAssessors; a++) addAssessor(a, gammaA);
    let traceA = sums[TRACE_A];
    let traceAP = sums[TRACE_AP];
    const qA = sums[Q_A];
    const qAP = sums[Q_AP];
    let tAA = sums[T_AA];
    let tAAP = sums[T_AAP];
    let tAPAP = sums[T_APAP];
    const traceInverseT = sums[TRACE_INVERSE_T];
    let qAA = sums[Q_AA];
    let qAAP = sums[Q_AAP];
    let qAPAP = sums[Q_APAP];
    multiply(inverse, sumU, inverseTimesU);
    tAA += traceOfProduct(inverseTimesU, inverseTimesU);
    if (withInteraction) {
      multiply(inverse, sumS, inverseTimesS);
      traceAP -= traceOfProduct(inverse, sumS);
      tAAP += traceOfProduct(inverseTimesS, inverseTimesU);
      tAPAP += traceOfProduct(inverseTimesS, inverseTimesS) - 2 * traceInverseT;
    }
    qAA -= bilinearForm(sumXiA, inverse, sumXiA, p);
    qAAP -= bilinearForm(sumXiA, inverse, sumXiAP, p);
    qAPAP -= bilinearForm(sumXiAP, inverse, sumXiAP, p);
    traces[0] = traceA;
    traces[1] = traceAP;
    traceProducts[0] = tAA;
    traceProducts[1] = traceProducts[2] = tAAP;
    traceProducts[3] = tAPAP;
    quadraticProducts[0] = qAA;
    quadraticProducts[1] = quadraticProducts[2] = qAAP;
    quadraticProducts[3] = qAPAP;
    residualQuadratics[0] = qA;
    if (withInteraction) residualQuadratics[1] = qAP;
  }

  return {
    nComponents: k,
    gradient,
    hessian,
    residualQuadratics,
    inverseC: inverse,
    lastGamma,
    evaluate(gammaA, gammaAP) {
      lastGamma.fill(Number.NaN);
      const value = criterion.valueAtGamma(gammaA, withInteraction ? gammaAP : 0);
      if (!Number.isFinite(value)) return Number.POSITIVE_INFINITY;
      pieces(gammaA);
      lastGamma[0] = gammaA;
      lastGamma[1] = withInteraction ? gammaAP : 0;
      const pwrss = state.pwrss();
      for (let i = 0; i < k; i++) {
        gradient[i] = traces[i] - (degrees * residualQuadratics[i]) / pwrss;
        for (let j = 0; j < k; j++) {
          hessian[i * k + j] =
            -traceProducts[i * 2 + j] + degrees * ((2 * quadraticProducts[i * 2 + j]) / pwrss - (residualQuadratics[i] * residualQuadratics[j]) / (pwrss * pwrss));
        }
      }
      return value;
    },
    fixedSigma(sigma2, targetGradient, targetHessian, covarianceDerivatives) {
      for (let i = 0; i < k; i++) {
        targetGradient[i] = traces[i] - residualQuadratics[i] / sigma2;
        for (let j = 0; j < k; j++) targetHessian[i * k + j] = -traceProducts[i * 2 + j] + (2 * quadraticProducts[i * 2 + j]) / sigma2;
      }
      multiply(inverseTimesU, inverse, covarianceDerivatives[0]);
      if (withInteraction) multiply(inverseTimesS, inverse, covarianceDerivatives[1]);
    },
  };
}

// Slots of the sums over assessors (addAssessor).
const TRACE_A = 0;
const TRACE_AP = 1;
const Q_A = 2;
const Q_AP = 3;
const T_AA = 4;
const T_AAP = 5;
const T_APAP = 6;
const TRACE_INVERSE_T = 7;
const Q_AA = 8;
const Q_AAP = 9;
const Q_APAP = 10;
const SUM_COUNT = 11;
