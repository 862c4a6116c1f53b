/**
 * Longer than 400 lines: the whole-session test, the replicate-level test and the pooled spread
 * and slope they share are one method (methods §5.10); apart, the same profile tables would be
 * built twice.
 *
 * Suspected swapped sample codes (methods §5.10 and §5.13): a test of "served as labelled" against
 * "p and q exchanged" for one assessor, judged against that assessor's own residual spread.
 *
 * Per assessor (cell means over replicates, or one replicate), each attribute centred over the
 * assessor's products and divided by s_j = √MS_AP,j: x_pj (own) and g_pj (leave-one-out panel
 * mean). Model: x_pj = b·g_pj + e_pj, e ~ N(0, τ²) (one slope b and one residual variance τ² for
 * the assessor, pooled over attributes). For the pair p, q, b and τ² are estimated with the two
 * products' ratings replaced by their mean (the pair's own difference is not used to judge it);
 * df ν = J(P − 2) − 1. With d_j = x_pj − x_qj and c_j = g_pj − g_qj, v = 2τ̂²:
 *   served:  d_j = b·c_j + ε_j,   swapped: d_j = −b·c_j + ε_j,
 * the log likelihood ratio (swapped : served) is −2b·S with S = Σ d c / v, D² = Σ c² / v.
 * The panel's profile is itself an estimate (the other assessors' noise, known from MS_AP), so b
 * and D² are taken net of it (errors in variables, Fuller 1987), and the SE of S ∓ b̂·D̃² includes
 * the slope's own variance: t₀ = (S − b̂·D̃²)/SE and t₁ = (S + b̂·D̃²)/SE (≈ t_ν under the
 * respective model; t₁ − t₀ is the shift a swap makes, computed without d).
 * τ̂² and b̂ are pooled with the assessor's recent sessions (lasting properties of an assessor):
 * τ̂² df-weighted under an F-test guard, b̂ by inverse-variance weights with the slope those
 * sessions predict (random-effects pooling, DerSimonian & Laird 1986) under a z-test guard.
 * A swap is alleged when the served assignment is rejected (t₀ ≤ −c) and the swapped one is not
 * (|t₁| < c), ρ ≥ minRelativeGain, b > 0 and the panel itself tells p and q apart (some attribute
 * with |c_j|/SE_j beyond the Bonferroni-over-attributes t quantile at 0.05, SE from MS_AP). The
 * cut-offs c of one session's whole-session tests share its part of the yearly budget (alerts per
 * year / sessions per year, half of it with replicates, weighted Bonferroni) by the levels of
 * these rules themselves, each pair's cut-off set by Spjøtvoll's (1972) most powerful allocation.
 * Replicate level (only when the whole session shows nothing for the pair): the same test on one
 * replicate's ratings, and the replicate's contrast must differ from the assessor's own other
 * replicates' in the direction a swap predicts, judged against their own replicate error.
 */
import { fQuantile, normalQuantile, tQuantile, tUpperTail } from '../distributions/index.js';
import { inverseVarianceCombination, randomEffectsPrediction } from './random-effects.js';
import { cellMeans, interactionMeanSquare, type SessionData } from './session-data.js';

export interface SwapFinding {
  assessor: string;
  /** null: the whole session (all replicates averaged); else the one replicate. */
  replicate: number | null;
  productA: string;
  productB: string;
  relativeGain: number;
  /** Sample codes served for the two products in this replicate, when known. */
  codes: [string | null, string | null];
  nAttributes: number;
  /** t₀: how far the pair's contrast lies from the served assignment's prediction, in its SEs. */
  tServed: number;
  /** t₁: the same for the swapped assignment (near 0 when the swap explains the ratings). */
  tSwapped: number;
  /** Degrees of freedom of the assessor's residual spread behind t₀ and t₁. */
  df: number;
  /** One-sided p of t₀ under "served as labelled" (before the Bonferroni correction). */
  pValue: number;
  /** The one-sided level the p was compared with: this pair's share of the budget (methods §5.10). */
  alphaPerTest: number;
  /** D: the pair's panel difference in units of the assessor's own SD of a difference. */
  separationSd: number;
  /** Largest |panel difference / SE| of the pair over the attributes. */
  panelSeparationT: number;
  /**
   * The assessor's slope on the panel profile (pair pooled, net of the panel's own noise), combined
   * with their recent sessions' slopes when those agree with it (methods §5.10).
   */
  slope: number;
}

export interface SwapOptions {
  minRelativeGain: number;
  minAttributes: number;
  /** Tolerated false swap alerts per panel-year (Bonferroni budget). */
  falseAlertsPerYear: number;
  /** Sessions per year, so the per-session budget adds up to the yearly one. */
  sessionsPerYear: number;
}

/** Level of the panel's own pairwise separation (LSD with Bonferroni over attributes). CP. */
const PANEL_SEPARATION_ALPHA = 0.05;

/**
 * An assessor's residual variance τ² from one session's whole-session fit (cell means, all
 * products, no pair pooled), in the s_j units of that session, with its df and the number of
 * replicates behind the cell means (τ² of a cell mean shrinks with more replicates).
 */
export interface ResidualSpread {
  variance: number;
  df: number;
  nReplicates: number;
  /**
   * The assessor's slope b̂ on the panel profile in that session (net of the panel's own noise) and
   * its sampling variance τ̂²·Σg̃²/(Σg̃² − noise)²; absent when it could not be estimated. The
   * slope has no units (own and panel profiles share the session's s_j), so sessions compare.
   */
  slope?: number;
  slopeVariance?: number;
}

/** Previous sessions of the assessor whose residual variances are pooled with the session's own. */
export const SWAP_HISTORY_SESSIONS = 6;
/**
 * Level of the check that the session's own residual variance is not larger than the assessor's
 * recent ones (one-sided F test); when it is, the session is judged on its own variance and df.
 */
export const SWAP_VARIANCE_CHECK_ALPHA = 0.05;
/**
 * Level of the two-sided check that the session's own slope agrees with the one its recent sessions
 * predict; when it does not, the session's slope is used alone.
 */
export const SWAP_SLOPE_CHECK_ALPHA = 0.05;

/** Usable attributes and their per-product sums; null when the session is too small for the check. */
function sessionTables(data: SessionData, minAttributes: number) {
  const usable = data.attributes
    .map((a) => ({ name: a.name, ms: interactionMeanSquare(data, a.name) ?? 0 }))
    .filter((a) => a.ms > 0)
    .map((a) => ({ ...a, sd: Math.sqrt(a.ms) }));
  if (usable.length < minAttributes || data.products.length < 4) return null;
  // Per attribute: cell means, and per product the sum and count of all assessors' cell means, so
  // that a leave-one-out panel mean is (sum − own)/(count − 1) without rescanning the panel.
  return usable.map((attribute) => {
    const means = cellMeans(data, attribute.name);
    const sum = new Map<string, number>();
    const count = new Map<string, number>();
    let nValues = 0;
    let nCells = 0;
    for (const [assessor, row] of means) {
      for (const [product, mean] of row) {
        sum.set(product, (sum.get(product) ?? 0) + mean);
        count.set(product, (count.get(product) ?? 0) + 1);
        nValues += data.values.get(attribute.name)?.get(assessor)?.get(product)?.length ?? 1;
        nCells++;
      }
    }
    return { attribute, means, sum, count, replicatesPerCell: nValues / Math.max(1, nCells), replicates: data.byReplicate.get(attribute.name) };
  });
}

/**
 * Each assessor's residual variance τ² about b·g in this session (the whole-session fit with no
 * pair pooled, df = J(P − 1) − 1), for pooling into later sessions' swap checks. A swap in this
 * session inflates it, which only makes later checks more cautious.
 */
export function assessorResidualSpreads(data: SessionData, minAttributes: number): Map<string, ResidualSpread> {
  const out = new Map<string, ResidualSpread>();
  const tables = sessionTables(data, minAttributes);
  if (!tables) return out;
  const nJ = tables.length;
  for (const assessor of data.assessors) {
    const products = data.products.filter((p) => tables.every((t) => t.means.get(assessor)?.has(p)));
    if (products.length < 4) continue;
    const profiles = profilesOf(tables, assessor, 0, products);
    if (!profiles) continue;
    const fit = residualFit(profiles.x, profiles.g, products.length, nJ, -1, -1);
    const df = nJ * (products.length - 1) - 1;
    if (!fit || df < 3 || !(fit.rss > 0)) continue;
    const variance = fit.rss / df;
    const spread: ResidualSpread = { variance, df, nReplicates: data.nReplicates };
    // No pair pooled: (P − 1)/P of the panel profile's noise is left after centring.
    const sggNet = fit.sgg - (profileNoise(tables, profiles.panelN, products.length) * (products.length - 1)) / products.length;
    if (sggNet > 0) {
      spread.slope = (fit.slope * fit.sgg) / sggNet;
      spread.slopeVariance = (variance * fit.sgg) / (sggNet * sggNet);
    }
    out.set(assessor, spread);
  }
  return out;
}

/** Σ over the cells of the panel means' own sampling variance, 1/(n̄·n) in s_j units. */
function profileNoise(tables: readonly Table[], panelN: Float64Array, nP: number): number {
  const nJ = tables.length;
  let noise = 0;
  for (let j = 0; j < nJ; j++) {
    for (let i = 0; i < nP; i++) noise += 1 / (tables[j].replicatesPerCell * panelN[i * nJ + j]);
  }
  return noise;
}

/**
 * @param priorSpreads per assessor, their residual spreads in earlier sessions (oldest first); the
 *   last SWAP_HISTORY_SESSIONS with the session's number of replicates are pooled with its own,
 *   and the slopes of the last SWAP_HISTORY_SESSIONS (any number of replicates) with its slope.
 */
export function detectSwappedCodes(
  data: SessionData,
  productTestP: ReadonlyMap<string, number | null>,
  options: SwapOptions,
  priorSpreads: ReadonlyMap<string, readonly ResidualSpread[]> = new Map(),
): SwapFinding[] {
  const tables = sessionTables(data, options.minAttributes);
  if (!tables) return [];
  const discriminating = tables.filter((t) => {
    const p = productTestP.get(t.attribute.name);
    return p !== null && p !== undefined && p < 0.05;
  });
  if (discriminating.length < 3) return [];
  const nJ = tables.length;
  const nPairs = (data.products.length * (data.products.length - 1)) / 2;
  // The session's share of the yearly budget; with replicates, half of it goes to the whole-session
  // check and half is shared by the replicate checks (weighted Bonferroni, Holm 1979).
  const sessionBudget = options.falseAlertsPerYear / Math.max(1, options.sessionsPerYear);
  const wholeBudget = data.nReplicates >= 2 ? sessionBudget / 2 : sessionBudget;
  // Each replicate check: its half shared equally (Bonferroni) over assessors × pairs × replicates.
  const alphaReplicate = sessionBudget / 2 / (data.assessors.length * nPairs * data.nReplicates);
  const findings: SwapFinding[] = [];

  // 1. The whole session (cell means): a swap of every replicate, with the replicate noise averaged.
  // Every pair of every assessor is measured first, then the session's whole-session budget is
  // shared over them by what a swap of each would show (swapCutoffs), then judged.
  const wholeTests = pairTests(data, tables, priorSpreads);
  // t₁ − t₀: the shift of t₀ that a swap of the pair makes, free of the pair's own contrast.
  const cutoffs = swapCutoffs(
    wholeTests.map((t) => ({ effect: t.stats.tSwapped - t.stats.tServed, df: t.stats.df })),
    wholeBudget,
  );
  const seen = new Set<string>();
  wholeTests.forEach((test, i) => {
    const critical = cutoffs[i];
    if (!alleged(test.stats, critical, options.minRelativeGain)) return;
    seen.add(`${test.assessor}|${test.productA}|${test.productB}`);
    findings.push({
      assessor: test.assessor,
      replicate: null,
      productA: test.productA,
      productB: test.productB,
      codes: [codeOf(data, test.assessor, test.productA, 1), codeOf(data, test.assessor, test.productB, 1)],
      nAttributes: nJ,
      alphaPerTest: tUpperTail(critical, test.stats.df),
      ...test.stats,
    });
  });
  if (data.nReplicates < 2) return findings;

  // 2. One replicate, only where the pair is not already explained by a whole-session swap.
  for (const assessor of data.assessors) {
    for (let replicate = 1; replicate <= data.nReplicates; replicate++) {
      const products = data.products.filter((p) =>
        tables.every((t) => t.replicates?.get(assessor)?.get(p)?.has(replicate) && [...(t.replicates?.get(assessor)?.get(p)?.keys() ?? [])].some((r) => r !== replicate)),
      );
      if (products.length < 4) continue;
      const own = profilesOf(tables, assessor, replicate, products);
      if (!own) continue;
      const within = withinAssessor(tables, assessor, replicate, products, nJ);
      for (let p = 0; p < products.length - 1; p++) {
        for (let q = p + 1; q < products.length; q++) {
          if (seen.has(`${assessor}|${products[p]}|${products[q]}`)) continue;
          const stats = pairStatistics(own.x, own.g, own.panelN, products.length, nJ, p, q, tables, null);
          if (!stats) continue;
          const critical = tQuantile(1 - alphaReplicate, stats.df);
          if (!alleged(stats, critical, options.minRelativeGain) || !replicatesDisagree(within, own.g, products.length, nJ, p, q, alphaReplicate)) continue;
          findings.push({
            assessor,
            replicate,
            productA: products[p],
            productB: products[q],
            codes: [codeOf(data, assessor, products[p], replicate), codeOf(data, assessor, products[q], replicate)],
            nAttributes: nJ,
            alphaPerTest: alphaReplicate,
            ...stats,
          });
        }
      }
    }
  }
  return findings;
}

/** One whole-session test of a pair of one assessor's products. */
export interface WholeSessionTest {
  assessor: string;
  productA: string;
  productB: string;
  stats: PairStatistics;
}

/** Every testable pair of every assessor on the whole session's cell means (before any cut-off). */
function pairTests(data: SessionData, tables: NonNullable<ReturnType<typeof sessionTables>>, priorSpreads: ReadonlyMap<string, readonly ResidualSpread[]>): WholeSessionTest[] {
  const nJ = tables.length;
  const out: WholeSessionTest[] = [];
  for (const assessor of data.assessors) {
    const sessionProducts = data.products.filter((p) => tables.every((t) => t.means.get(assessor)?.has(p)));
    if (sessionProducts.length < 4) continue;
    const whole = profilesOf(tables, assessor, 0, sessionProducts);
    if (!whole) continue;
    const history = priorSpreads.get(assessor) ?? [];
    const prior: HistoryPrior = { spread: pooledPrior(history, data.nReplicates), slope: pooledSlope(history) };
    for (let p = 0; p < sessionProducts.length - 1; p++) {
      for (let q = p + 1; q < sessionProducts.length; q++) {
        const stats = pairStatistics(whole.x, whole.g, whole.panelN, sessionProducts.length, nJ, p, q, tables, prior);
        if (stats) out.push({ assessor, productA: sessionProducts[p], productB: sessionProducts[q], stats });
      }
    }
  }
  return out;
}

/**
 * The whole-session statistics (t₀, t₁, df, …) of every testable pair, without cut-offs or the
 * session's gates on discriminating attributes: for checking t₀'s calibration (bench, tests).
 */
export function wholeSessionTests(data: SessionData, minAttributes: number, priorSpreads: ReadonlyMap<string, readonly ResidualSpread[]> = new Map()): WholeSessionTest[] {
  const tables = sessionTables(data, minAttributes);
  return tables ? pairTests(data, tables, priorSpreads) : [];
}

/** Centred, scaled own ratings x and leave-one-out panel profile g over `products`. */
function profilesOf(tables: NonNullable<ReturnType<typeof sessionTables>>, assessor: string, replicate: number, products: readonly string[]): { x: Float64Array; g: Float64Array; panelN: Float64Array } | null {
  const nP = products.length;
  const nJ = tables.length;
  const x = new Float64Array(nP * nJ);
  const g = new Float64Array(nP * nJ);
  // Per product × attribute: assessors behind the leave-one-out mean (for the panel's SE).
  const panelN = new Float64Array(nP * nJ);
  for (let j = 0; j < nJ; j++) {
    const table = tables[j];
    let ownSum = 0;
    let panelSum = 0;
    for (let i = 0; i < nP; i++) {
      const p = products[i];
      const others = (table.count.get(p) ?? 0) - 1;
      if (others <= 0) return null;
      const own = (replicate === 0 ? table.means.get(assessor)?.get(p) : table.replicates?.get(assessor)?.get(p)?.get(replicate)) as number;
      const panel = ((table.sum.get(p) ?? 0) - (table.means.get(assessor)?.get(p) ?? 0)) / others;
      x[i * nJ + j] = own;
      g[i * nJ + j] = panel;
      panelN[i * nJ + j] = others;
      ownSum += own;
      panelSum += panel;
    }
    const sd = table.attribute.sd;
    for (let i = 0; i < nP; i++) {
      x[i * nJ + j] = (x[i * nJ + j] - ownSum / nP) / sd;
      g[i * nJ + j] = (g[i * nJ + j] - panelSum / nP) / sd;
    }
  }
  return { x, g, panelN };
}

/**
 * The assessor's df-weighted residual variance over their last SWAP_HISTORY_SESSIONS earlier
 * sessions with the same number of replicates (a cell mean's τ² depends on it); null when none.
 */
function pooledPrior(spreads: readonly ResidualSpread[], nReplicates: number): { variance: number; df: number } | null {
  const same = spreads.filter((s) => s.nReplicates === nReplicates && s.df > 0 && s.variance > 0).slice(-SWAP_HISTORY_SESSIONS);
  const df = same.reduce((a, s) => a + s.df, 0);
  if (same.length === 0 || !(df > 0)) return null;
  return { variance: same.reduce((a, s) => a + s.df * s.variance, 0) / df, df };
}

/**
 * The slope the assessor's last SWAP_HISTORY_SESSIONS sessions predict for this one, and the
 * variance of that prediction; null with fewer than two. Random-effects pooling (DerSimonian &
 * Laird 1986): the sessions' slopes weighted by 1/(V_k + σ̂_u²), σ̂_u² the between-session variance
 * of the true slope by the method of moments (Cochran's Q, truncated at 0); a new session's slope
 * differs from their mean by σ_u² on top of the mean's own variance.
 */
function pooledSlope(spreads: readonly ResidualSpread[]): { slope: number; variance: number } | null {
  const usable = spreads
    .slice(-SWAP_HISTORY_SESSIONS)
    .filter((s): s is ResidualSpread & { slope: number; slopeVariance: number } => Number.isFinite(s.slope) && (s.slopeVariance ?? 0) > 0);
  const prediction = randomEffectsPrediction(usable.map((s) => ({ value: s.slope, variance: s.slopeVariance })));
  return prediction && { slope: prediction.mean, variance: prediction.predictionVariance };
}

/** What the assessor's recent sessions say: their pooled residual variance and predicted slope. */
interface HistoryPrior {
  spread: { variance: number; df: number } | null;
  slope: { slope: number; variance: number } | null;
}

/** Slope of x on g and residual sum of squares, rows p and q replaced by their mean (p = q = −1: none). */
function residualFit(x: Float64Array, g: Float64Array, nP: number, nJ: number, p: number, q: number): { slope: number; rss: number; sgg: number } | null {
  let sxg = 0;
  let sgg = 0;
  for (let i = 0; i < nP; i++) {
    for (let j = 0; j < nJ; j++) {
      const [xv, gv] = pooledRow(x, g, nJ, p, q, i, j);
      sxg += xv * gv;
      sgg += gv * gv;
    }
  }
  if (!(sgg > 0)) return null;
  const slope = sxg / sgg;
  let rss = 0;
  for (let i = 0; i < nP; i++) {
    for (let j = 0; j < nJ; j++) {
      const [xv, gv] = pooledRow(x, g, nJ, p, q, i, j);
      rss += (xv - slope * gv) ** 2;
    }
  }
  return { slope, rss, sgg };
}

type Table = { attribute: { name: string; sd: number; ms: number }; replicatesPerCell: number };
type PairStatistics = Pick<SwapFinding, 'relativeGain' | 'tServed' | 'tSwapped' | 'df' | 'pValue' | 'separationSd' | 'panelSeparationT' | 'slope'>;

/**
 * The served-versus-swapped statistics of products p and q on centred, scaled profiles x (own) and
 * g (panel), nP products × nJ attributes, row-major; null when the pair cannot be tested: the
 * panel does not separate it, or the assessor's slope on the panel profile is not positive. These
 * two conditions and the pair's separation D do not use the pair's own contrast d (methods §5.10).
 */
function pairStatistics(
  x: Float64Array,
  g: Float64Array,
  panelN: Float64Array,
  nP: number,
  nJ: number,
  p: number,
  q: number,
  tables: readonly Table[],
  prior: HistoryPrior | null,
): PairStatistics | null {
  // The panel must tell p and q apart on some attribute: |c_j| against the SE of a difference of
  // two product means, √(2 MS_AP / (n̄ · assessors)), in the same s_j units (so √(2 / (n̄ n))).
  let panelSeparationT = 0;
  let minDf = Infinity;
  // Σ_j of the panel contrast's own sampling variance (the squared SE below).
  let panelNoise = 0;
  for (let j = 0; j < nJ; j++) {
    const c = g[p * nJ + j] - g[q * nJ + j];
    const n = Math.min(panelN[p * nJ + j], panelN[q * nJ + j]);
    const se = Math.sqrt(2 / (tables[j].replicatesPerCell * n));
    panelNoise += se * se;
    panelSeparationT = Math.max(panelSeparationT, Math.abs(c) / se);
    minDf = Math.min(minDf, Math.max(1, (n - 1) * (nP - 1)));
  }
  if (panelSeparationT < tQuantile(1 - PANEL_SEPARATION_ALPHA / (2 * nJ), minDf)) return null;
  // The assessor's slope on the panel profile and residual variance, with the pair pooled (both
  // rows replaced by their mean, so the pair's own difference is not used to judge it).
  const fit = residualFit(x, g, nP, nJ, p, q);
  if (!fit) return null;
  // The slope on the noisy panel profile is attenuated (Σg̃² holds the panel means' own sampling
  // variance, 1/(n̄·n) per cell in s_j units, (P − 2)/P of it left after centring and pooling the
  // pair); its method-of-moments correction divides by Σg̃² net of that noise (Fuller 1987, §1.1).
  const sggNet = fit.sgg - (profileNoise(tables, panelN, nP) * (nP - 2)) / nP;
  if (!(sggNet > 0)) return null;
  const { rss } = fit;
  const sessionSlope = (fit.slope * fit.sgg) / sggNet;
  // Rows p and q pooled leave P − 2 df per attribute after centring; one more for the slope.
  const ownDf = nJ * (nP - 2) - 1;
  if (ownDf < 3 || !(rss > 0)) return null;
  const ownVariance = rss / ownDf;
  // With the assessor's recent sessions: the df-weighted pool, never below the session's own
  // variance (so a noisy day is not judged by a quieter history), and the session alone when its
  // variance is beyond the history's by the one-sided F test.
  let residualVariance = ownVariance;
  let df = ownDf;
  const spread = prior?.spread;
  if (spread && ownVariance / spread.variance <= fQuantile(1 - SWAP_VARIANCE_CHECK_ALPHA, ownDf, spread.df)) {
    df = ownDf + spread.df;
    residualVariance = Math.max(ownVariance, (rss + spread.variance * spread.df) / df);
  }
  // The slope, likewise: the session's (variance τ̂²·Σg̃²/Σg̃²_net², a prediction's coefficient)
  // combined by inverse-variance weights with the one the recent sessions predict, unless a
  // two-sided z test at SWAP_SLOPE_CHECK_ALPHA finds the two apart (then the session's alone).
  let slope = sessionSlope;
  let slopeVariance = (residualVariance * fit.sgg) / (sggNet * sggNet);
  const history = prior?.slope;
  if (history && Math.abs(sessionSlope - history.slope) <= normalQuantile(1 - SWAP_SLOPE_CHECK_ALPHA / 2) * Math.sqrt(slopeVariance + history.variance)) {
    const combined = inverseVarianceCombination({ value: sessionSlope, variance: slopeVariance }, { value: history.slope, variance: history.variance });
    slope = combined.value;
    slopeVariance = combined.variance;
  }
  if (!(slope > 0)) return null;
  const differenceVariance = 2 * residualVariance;
  let s = 0;
  let cc = 0;
  for (let j = 0; j < nJ; j++) {
    const d = x[p * nJ + j] - x[q * nJ + j];
    const c = g[p * nJ + j] - g[q * nJ + j];
    s += d * c;
    cc += c * c;
  }
  s /= differenceVariance;
  const separationSq = cc / differenceVariance;
  const separationSd = Math.sqrt(separationSq);
  if (!(separationSd > 0)) return null;
  // The panel's contrast c is itself an estimate, c = c_true + η (η: the other assessors' own
  // interaction and replicate error, Σ Var η_j = panelNoise in s_j units), and E Σ c_j² = Σ c_true,j² +
  // panelNoise: under "served" E[S] = b·(D² − K), K = panelNoise / v, not b·D². So the prediction uses
  // the panel's separation net of its own noise (the method-of-moments correction for a regressor
  // measured with error, Fuller 1987); v already holds b²·Var η (τ̂² is measured about the noisy g).
  // A pair the panel does not separate beyond its noise predicts no difference: no swap is testable.
  const netSeparationSq = separationSq - panelNoise / differenceVariance;
  if (!(netSeparationSq > 0)) return null;
  // SE of S ∓ b̂·(D² − K): S has variance D², and b̂ (from the pooled rows and earlier sessions,
  // independent of d) its variance above, which a pair whose panel contrast is large against the
  // spread of the other products' profiles feels (the variance of a prediction with an estimated
  // coefficient).
  const statisticSe = Math.sqrt(separationSq + netSeparationSq * netSeparationSq * slopeVariance);
  const tServed = (s - slope * netSeparationSq) / statisticSe;
  const tSwapped = (s + slope * netSeparationSq) / statisticSe;
  // ρ: the share of the pair's distance from the panel profiles that the exchange removes.
  const distance = (a: number, b: number): number => {
    let sum = 0;
    for (let j = 0; j < nJ; j++) sum += (x[a * nJ + j] - g[b * nJ + j]) ** 2;
    return sum;
  };
  const served = distance(p, p) + distance(q, q);
  const relativeGain = served > 0 ? (served - distance(p, q) - distance(q, p)) / served : 0;
  return { relativeGain, tServed, tSwapped, df, pValue: 1 - tUpperTail(tServed, df), separationSd, panelSeparationT, slope };
}

/**
 * A swap is alleged when "served" is rejected (t₀ ≤ −critical), "swapped" is not (|t₁| < critical)
 * and the distance gain ρ is at least minRelativeGain.
 */
function alleged(stats: PairStatistics, critical: number, minRelativeGain: number): boolean {
  return stats.tServed <= -critical && Math.abs(stats.tSwapped) < critical && stats.relativeGain >= minRelativeGain;
}

/**
 * Under "served", t₁ = t₀ + effect, so the rule "t₀ ≤ −c and |t₁| < c" rejects exactly when
 * t₀ ∈ (−c − effect, min(−c, c − effect)]; its level, with t₀ ~ t_df.
 */
export function swapRuleLevel(critical: number, effect: number, df: number): number {
  const upper = Math.min(-critical, critical - effect);
  const lower = -critical - effect;
  if (!(upper > lower)) return 0;
  // Lower tails as upper tails of the negated bounds (no 1 − p for small p).
  return Math.max(0, tUpperTail(-upper, df) - tUpperTail(-lower, df));
}

/**
 * Cut-offs c_i of the whole-session tests of one session, for pairs whose swap would shift t₀ by
 * effect_i (t₁ − t₀, not using the pairs' own contrasts), such that the levels of the rules applied
 * (swapRuleLevel: served rejected and swapped not, both at c_i) add up to at most alphaTotal
 * (Bonferroni's inequality over the rejection events themselves), and the expected number of swaps
 * found is largest: by Spjøtvoll (1972) the rule rejects where the likelihood ratio swapped :
 * served exceeds one constant common to all pairs, for a shift of a normal t₀ that is
 * c_i = effect_i/2 + k/effect_i (methods §5.10). A pair whose swap would be barely visible, or
 * visible at any level, gets a high cut-off and spends little; equal effects give one common
 * cut-off. The effects must not depend on the t₀ under "served" (Bourgon, Gentleman & Huber 2010).
 * Pure; k ≥ 0 is found by bisection, always on the side within the budget.
 */
export function swapCutoffs(tests: readonly { effect: number; df: number }[], alphaTotal: number): number[] {
  if (!(alphaTotal > 0)) return tests.map(() => Infinity);
  const cutoffs = (k: number) => tests.map((t) => (t.effect > 0 ? t.effect / 2 + k / t.effect : Infinity));
  const total = (k: number) => cutoffs(k).reduce((sum, c, i) => sum + (Number.isFinite(c) ? swapRuleLevel(c, tests[i].effect, tests[i].df) : 0), 0);
  if (total(0) <= alphaTotal) return cutoffs(0);
  let low = 0;
  let high = 8;
  while (total(high) > alphaTotal) {
    low = high;
    high *= 2;
    if (high > 1e6) return tests.map(() => Infinity);
  }
  while (high - low > 1e-6 * high) {
    const mid = (low + high) / 2;
    if (total(mid) > alphaTotal) low = mid;
    else high = mid;
  }
  return cutoffs(high);
}

/** Row i, attribute j of (x, g) with rows p and q replaced by their mean. */
function pooledRow(x: Float64Array, g: Float64Array, nJ: number, p: number, q: number, i: number, j: number): [number, number] {
  if (i === p || i === q) return [(x[p * nJ + j] + x[q * nJ + j]) / 2, (g[p * nJ + j] + g[q * nJ + j]) / 2];
  return [x[i * nJ + j], g[i * nJ + j]];
}

/**
 * The assessor's replicate r and their other replicates' mean, both scaled by s_j, and per cell the
 * squared deviations of the replicates from the cell mean (scaled) with their df, for the
 * assessor's own replicate error.
 */
function withinAssessor(
  tables: readonly (Table & { replicates?: Map<string, Map<string, Map<number, number>>> })[],
  assessor: string,
  replicate: number,
  products: readonly string[],
  nJ: number,
): { one: Float64Array; rest: Float64Array; restWeight: Float64Array; cellSs: Float64Array; cellDf: Float64Array } {
  const nP = products.length;
  const one = new Float64Array(nP * nJ);
  const rest = new Float64Array(nP * nJ);
  // 1 + 1/(number of other replicates): the variance of (one − rest) in units of the replicate error.
  const restWeight = new Float64Array(nP * nJ);
  const cellSs = new Float64Array(nP * nJ);
  const cellDf = new Float64Array(nP * nJ);
  for (let j = 0; j < nJ; j++) {
    const sd = tables[j].attribute.sd;
    for (let i = 0; i < nP; i++) {
      const cell = tables[j].replicates?.get(assessor)?.get(products[i]) ?? new Map<number, number>();
      const values = [...cell.values()];
      const mean = values.reduce((a, b) => a + b, 0) / values.length;
      for (const v of values) cellSs[i * nJ + j] += ((v - mean) / sd) ** 2;
      cellDf[i * nJ + j] = values.length - 1;
      const others = [...cell].filter(([r]) => r !== replicate).map(([, v]) => v);
      one[i * nJ + j] = (cell.get(replicate) as number) / sd;
      rest[i * nJ + j] = others.reduce((a, b) => a + b, 0) / others.length / sd;
      restWeight[i * nJ + j] = 1 + 1 / others.length;
    }
  }
  return { one, rest, restWeight, cellSs, cellDf };
}

/**
 * Whether replicate r's contrast of p and q differs from the assessor's other replicates' in the
 * direction a swap in r predicts (against the panel's contrast c): z = Σ (Δ_r − Δ_rest)_j c_j /
 * √(Var · Σ c_j²) ≤ −t*, with Var the assessor's own replicate error over the other products
 * (a swap in r would inflate it in the pair's cells). Product and level effects cancel in
 * Δ_r − Δ_rest, so only replicate error is left under "no swap".
 */
function replicatesDisagree(
  within: ReturnType<typeof withinAssessor>,
  g: Float64Array,
  nP: number,
  nJ: number,
  p: number,
  q: number,
  alphaPerTest: number,
): boolean {
  let ss = 0;
  let df = 0;
  for (let i = 0; i < nP; i++) {
    if (i === p || i === q) continue;
    for (let j = 0; j < nJ; j++) {
      ss += within.cellSs[i * nJ + j];
      df += within.cellDf[i * nJ + j];
    }
  }
  if (df < 3 || !(ss > 0)) return false;
  const errorVariance = ss / df;
  let s = 0;
  let scale = 0;
  for (let j = 0; j < nJ; j++) {
    const c = g[p * nJ + j] - g[q * nJ + j];
    const delta = within.one[p * nJ + j] - within.one[q * nJ + j] - (within.rest[p * nJ + j] - within.rest[q * nJ + j]);
    s += delta * c;
    scale += c * c * (within.restWeight[p * nJ + j] + within.restWeight[q * nJ + j]);
  }
  if (!(scale > 0)) return false;
  const t = s / Math.sqrt(errorVariance * scale);
  return t <= -tQuantile(1 - alphaPerTest, df);
}

function codeOf(data: SessionData, assessor: string, product: string, replicate: number): string | null {
  return data.ratings.find((r) => r.assessor === assessor && r.product === product && r.replicate === replicate && r.code !== null)?.code ?? null;
}
