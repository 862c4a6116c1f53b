/**
 * Per-session checks on raw ratings (methods §5, common practice, thresholds in PanelThresholds.quality):
 * straight-lining (§5.6), scale-end clipping (§5.7), missing cells (§5.5) and in-range decimal
 * shift on wide scales (§5.3b).
 */
import { cellMeans, interactionMeanSquare, meanOf, medianOf, type SessionData } from './session-data.js';

export interface StraightLiningFinding {
  assessor: string;
  attribute: string;
  severity: 'watch' | 'act';
  /** SD over products of the assessor's cell means (scale units). */
  spreadSd: number;
  /** Panel median of the same SD. */
  panelMedianSpreadSd: number;
  /** Range over products of the assessor's cell means. */
  range: number;
  resolution: number;
}

export interface StraightLiningSummary {
  assessor: string;
  /** Attributes with no variation at all (act-level findings). */
  nFlatAttributes: number;
  nAttributes: number;
  sessionAct: boolean;
}

/**
 * Resolution δ of an attribute in a session: the smallest positive difference between distinct
 * values, floored at R/1000 (methods §5 notation).
 */
export function resolutionOf(values: readonly number[], scaleRange: number): number {
  const distinct = [...new Set(values)].sort((a, b) => a - b);
  let smallest = Infinity;
  for (let i = 1; i < distinct.length; i++) smallest = Math.min(smallest, distinct[i] - distinct[i - 1]);
  return Math.max(Number.isFinite(smallest) ? smallest : 0, scaleRange / 1000);
}

/** See checkStraightLining: panel median range of cell means, in scale steps, for a flat profile to count. */
const FLAT_MIN_PANEL_STEPS = 3;

export function checkStraightLining(
  data: SessionData,
  productTestP: ReadonlyMap<string, number | null>,
  options: { watchRatio: number; actShare: number },
): { findings: StraightLiningFinding[]; summaries: StraightLiningSummary[] } {
  const findings: StraightLiningFinding[] = [];
  const flatCount = new Map<string, number>();
  const attributeCount = new Map<string, number>();
  for (const attribute of data.attributes) {
    const means = cellMeans(data, attribute.name);
    const all: number[] = [];
    for (const byProduct of data.values.get(attribute.name)?.values() ?? []) for (const vs of byProduct.values()) all.push(...vs);
    const resolution = resolutionOf(all, attribute.scaleMax - attribute.scaleMin);
    const spreads = new Map<string, { sd: number; range: number }>();
    for (const [assessor, row] of means) {
      const m = [...row.values()];
      if (m.length < 3) continue;
      const mean = meanOf(m);
      const sd = Math.sqrt(m.reduce((s, v) => s + (v - mean) ** 2, 0) / (m.length - 1));
      spreads.set(assessor, { sd, range: Math.max(...m) - Math.min(...m) });
    }
    if (spreads.size < 3) continue;
    const panelMedian = medianOf([...spreads.values()].map((s) => s.sd));
    const panelDiscriminates = (productTestP.get(attribute.name) ?? 1) < 0.05;
    // On a coarse scale (e.g. whole numbers) products a point or two apart are often given the same
    // value by a careful assessor, and an assessor who missed the one distinct product has nothing
    // to separate: "flat" counts only where the panel's product means, over the products this
    // assessor rated, span at least FLAT_MIN_PANEL_STEPS scale steps (CP, no source).
    const panelSum = new Map<string, { sum: number; n: number }>();
    for (const row of means.values()) {
      for (const [product, m] of row) {
        const entry = panelSum.get(product) ?? { sum: 0, n: 0 };
        entry.sum += m;
        entry.n += 1;
        panelSum.set(product, entry);
      }
    }
    const panelSpreadsProducts = (assessor: string): boolean => {
      const own = [...(means.get(assessor)?.keys() ?? [])].map((p) => {
        const entry = panelSum.get(p) as { sum: number; n: number };
        return entry.sum / entry.n;
      });
      return own.length > 0 && Math.max(...own) - Math.min(...own) >= FLAT_MIN_PANEL_STEPS * resolution;
    };
    for (const [assessor, spread] of spreads) {
      attributeCount.set(assessor, (attributeCount.get(assessor) ?? 0) + 1);
      const flat = spread.range <= resolution && panelDiscriminates && panelSpreadsProducts(assessor);
      if (flat) flatCount.set(assessor, (flatCount.get(assessor) ?? 0) + 1);
      const low = panelMedian > 0 && spread.sd / panelMedian < options.watchRatio;
      if (flat || low) {
        findings.push({ assessor, attribute: attribute.name, severity: flat ? 'act' : 'watch', spreadSd: spread.sd, panelMedianSpreadSd: panelMedian, range: spread.range, resolution });
      }
    }
  }
  const summaries = [...attributeCount].map(([assessor, nAttributes]) => {
    const nFlat = flatCount.get(assessor) ?? 0;
    return { assessor, nFlatAttributes: nFlat, nAttributes, sessionAct: nFlat > 0 && nFlat / nAttributes >= options.actShare };
  });
  return { findings, summaries };
}

export interface ClippingFinding {
  assessor: string;
  severity: 'watch' | 'act';
  /** Share of the assessor's ratings in either end zone (all attributes). */
  endShare: number;
  panelMedianEndShare: number;
  nRatings: number;
}

export function checkClipping(data: SessionData, options: { zoneFraction: number; watchFraction: number; watchMultiple: number; actFraction: number }): ClippingFinding[] {
  const scale = new Map(data.attributes.map((a) => [a.name, a]));
  const counts = new Map<string, { inZone: number; n: number }>();
  for (const r of data.ratings) {
    const a = scale.get(r.attribute);
    if (!a) continue;
    const zone = options.zoneFraction * (a.scaleMax - a.scaleMin);
    const c = counts.get(r.assessor) ?? { inZone: 0, n: 0 };
    c.n++;
    if (r.value <= a.scaleMin + zone || r.value >= a.scaleMax - zone) c.inZone++;
    counts.set(r.assessor, c);
  }
  if (counts.size === 0) return [];
  const shares = new Map([...counts].map(([assessor, c]) => [assessor, c.inZone / c.n]));
  const panelMedian = medianOf([...shares.values()]);
  const out: ClippingFinding[] = [];
  for (const [assessor, share] of shares) {
    const severity = share >= options.actFraction ? 'act' : share >= options.watchFraction && share >= options.watchMultiple * panelMedian ? 'watch' : null;
    if (severity) out.push({ assessor, severity, endShare: share, panelMedianEndShare: panelMedian, nRatings: counts.get(assessor)?.n ?? 0 });
  }
  return out;
}

export interface MissingCellsFinding {
  assessor: string;
  severity: 'watch' | 'act';
  /** rated cells / (products × attributes × planned replicates). */
  completeness: number;
  nRated: number;
  nPlanned: number;
}

/** Assessors present in the session with completeness below the watch level (absent assessors are not flagged). */
export function checkMissingCells(data: SessionData, options: { watchCompleteness: number; actCompleteness: number }): MissingCellsFinding[] {
  const nPlanned = data.products.length * data.attributes.length * data.nReplicates;
  if (nPlanned === 0) return [];
  // Distinct (product, attribute, replicate) cells per assessor, counted from the replicate table.
  const rated = new Map<string, number>();
  for (const byAssessor of data.byReplicate.values()) {
    for (const [assessor, byProduct] of byAssessor) {
      let n = 0;
      for (const replicates of byProduct.values()) n += replicates.size;
      rated.set(assessor, (rated.get(assessor) ?? 0) + n);
    }
  }
  const out: MissingCellsFinding[] = [];
  for (const [assessor, nRated] of rated) {
    const completeness = nRated / nPlanned;
    const severity = completeness < options.actCompleteness ? 'act' : completeness < options.watchCompleteness ? 'watch' : null;
    if (severity) out.push({ assessor, severity, completeness, nRated, nPlanned });
  }
  return out;
}

export interface DecimalShiftFinding {
  assessor: string;
  product: string;
  attribute: string;
  replicate: number;
  value: number;
  suggestedValue: number;
  panelMedian: number;
  panelRobustSd: number;
}

/**
 * In-range decimal shift on wide scales (methods §5.3b): M_p, S_p = median and 1.4826·MAD of the
 * other assessors' ratings of the product (S_p = 0 → √MS_AP); watch when |v − M| > z·S and
 * (|10v − M| ≤ S or |v/10 − M| ≤ S).
 */
export function checkInRangeDecimalShift(data: SessionData, options: { minRange: number; robustZ: number }): DecimalShiftFinding[] {
  const out: DecimalShiftFinding[] = [];
  for (const attribute of data.attributes) {
    if (attribute.scaleMax - attribute.scaleMin < options.minRange) continue;
    const rows = data.ratings.filter((r) => r.attribute === attribute.name);
    const fallback = Math.sqrt(interactionMeanSquare(data, attribute.name) ?? 0);
    for (const r of rows) {
      const others = rows.filter((o) => o.product === r.product && o.assessor !== r.assessor).map((o) => o.value);
      if (others.length < 3) continue;
      const m = medianOf(others);
      let s = 1.4826 * medianOf(others.map((v) => Math.abs(v - m)));
      if (!(s > 0)) s = fallback;
      if (!(s > 0)) continue;
      if (Math.abs(r.value - m) <= options.robustZ * s) continue;
      const candidates = [r.value * 10, r.value / 10].filter((v) => Math.abs(v - m) <= s);
      if (candidates.length === 0) continue;
      out.push({ assessor: r.assessor, product: r.product, attribute: attribute.name, replicate: r.replicate, value: r.value, suggestedValue: candidates[0], panelMedian: m, panelRobustSd: s });
    }
  }
  return out;
}
