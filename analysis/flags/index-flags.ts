/**
 * Flags from per-session assessor indices pooled over the most recent sessions (methods §2, §6):
 * lenient/harsh (level offset), inconsistent (repeatability), non-discriminating, disagreement,
 * reversed, scale-compression/-expansion. For each index, the family is all assessor × attribute
 * pairs of this evaluation; act decisions use Benjamini–Hochberg q-values within the family
 * (methods §6.2), watch decisions the raw p-value, both with a magnitude guard (methods §6.3).
 */
import type { Flag, FlagKind, FlagSeverity } from '../../domain/flags.js';
import type { AssessorSessionIndices } from '../indices/types.js';
import { benjaminiHochberg } from '../multiple-testing/index.js';
import type { SessionAttributeResult } from '../monitor/series.js';
import { median } from '../monitor/series.js';
import { othersOf, resultKey, type FlagContext } from './context.js';
import { points, sessionsText } from './format.js';
import { oneSampleTTest, type Alternative, type PooledTest } from './pooled-test.js';

export interface PooledPair {
  assessor: string;
  attribute: string;
  sessions: string[];
  values: number[];
  /** Per-session companion values (e.g. the panel median), same order as `values`. */
  companions: number[];
  test: PooledTest;
  qValue: number;
}

interface PooledRule {
  /** Value of the index for one assessor in one session/attribute, or null when it does not count. */
  value(row: AssessorSessionIndices, result: SessionAttributeResult): number | null;
  /** Optional companion value per session (kept for evidence and messages). */
  companion?(row: AssessorSessionIndices, result: SessionAttributeResult): number | null;
  alternative: Alternative;
}

/** Runs one pooled rule over every assessor × attribute pair in the recent window, with BH across pairs. */
export function pooledPairs(ctx: FlagContext, rule: PooledRule): PooledPair[] {
  const pairs: Omit<PooledPair, 'qValue'>[] = [];
  // The 95 % interval's t quantile by df, for this rule's tests only (the window gives few df).
  const quantiles = new Map<number, number>();
  for (const attribute of ctx.history.attributes) {
    const byAssessor = new Map<string, { sessions: string[]; values: number[]; companions: number[] }>();
    for (const session of ctx.recentWindow) {
      const result = ctx.results.get(resultKey(session, attribute.name));
      if (!result) continue;
      for (const row of result.indices) {
        const value = rule.value(row, result);
        if (value === null || !Number.isFinite(value)) continue;
        let entry = byAssessor.get(row.assessor);
        if (!entry) byAssessor.set(row.assessor, (entry = { sessions: [], values: [], companions: [] }));
        entry.sessions.push(session);
        entry.values.push(value);
        entry.companions.push(rule.companion?.(row, result) ?? Number.NaN);
      }
    }
    for (const [assessor, entry] of byAssessor) {
      if (entry.values.length < ctx.settings.minPooledSessions) continue;
      const test = oneSampleTTest(entry.values, rule.alternative, 0, quantiles);
      if (test) pairs.push({ assessor, attribute: attribute.name, ...entry, test });
    }
  }
  const { adjusted } = benjaminiHochberg(pairs.map((p) => p.test.pValue), ctx.settings.fdrLevel);
  return pairs.map((p, i) => ({ ...p, qValue: adjusted[i] ?? 1 }));
}

function baseEvidence(pair: PooledPair, test: string, threshold: string, extra: Record<string, unknown>) {
  return {
    test,
    statistic: pair.test.t,
    pValue: pair.test.pValue,
    qValue: pair.qValue,
    n: pair.test.n,
    threshold,
    df: pair.test.df,
    sessions: pair.sessions,
    lastSession: pair.sessions[pair.sessions.length - 1],
    ...extra,
  };
}

function flag(kind: FlagKind, severity: FlagSeverity, pair: PooledPair, evidence: Flag['evidence'], message: string): Flag {
  return { kind, assessor: pair.assessor, product: null, attribute: pair.attribute, firstSession: pair.sessions[0], severity, evidence, message };
}

/**
 * Natural spread of assessors' level offsets on one attribute: 1.4826 × MAD of the pooled offsets
 * over assessors (a robust SD, Huber 1981; Iglewicz & Hoaglin 1993), null with fewer than
 * NATURAL_SPREAD_MIN_ASSESSORS assessors. Trained assessors keep small personal offsets per
 * attribute that are not faults; an offset is flagged only when it also stands out from them.
 */
const NATURAL_SPREAD_MIN_ASSESSORS = 6;
/**
 * Robust z of an offset among the panel's offsets needed for act (3.5, the modified z-score
 * cut-off of Iglewicz & Hoaglin 1993) and watch (2, CP).
 */
const NATURAL_ACT_Z = 3.5;
const NATURAL_WATCH_Z = 2;

function naturalOffsetSpread(pairs: readonly PooledPair[]): Map<string, { centre: number; sd: number }> {
  const byAttribute = new Map<string, number[]>();
  for (const p of pairs) byAttribute.set(p.attribute, [...(byAttribute.get(p.attribute) ?? []), p.test.mean]);
  const out = new Map<string, { centre: number; sd: number }>();
  for (const [attribute, means] of byAttribute) {
    if (means.length < NATURAL_SPREAD_MIN_ASSESSORS) continue;
    const centre = median(means);
    out.set(attribute, { centre, sd: 1.4826 * median(means.map((m) => Math.abs(m - centre))) });
  }
  return out;
}

/** Lenient (pooled offset above the rest of the panel) and harsh (below). */
export function levelFlags(ctx: FlagContext): Flag[] {
  const t = ctx.settings;
  const out: Flag[] = [];
  const pairs = pooledPairs(ctx, { value: (row) => row.offset, alternative: 'two-sided' });
  const natural = naturalOffsetSpread(pairs);
  for (const pair of pairs) {
    const range = ctx.scaleRange.get(pair.attribute) ?? 1;
    const size = Math.abs(pair.test.mean);
    const spread = natural.get(pair.attribute) ?? null;
    const robustZ = spread && spread.sd > 0 ? Math.abs(pair.test.mean - spread.centre) / spread.sd : Infinity;
    const severity: FlagSeverity | null =
      pair.qValue < t.fdrLevel && size >= t.level.actFraction * range && robustZ >= NATURAL_ACT_Z
        ? 'act'
        : pair.test.pValue < t.level.watchPValue && size >= t.level.watchFraction * range && robustZ >= NATURAL_WATCH_Z
          ? 'watch'
          : null;
    if (!severity) continue;
    const kind = pair.test.mean > 0 ? 'lenient' : 'harsh';
    const naturalText = spread ? ` and at least ${severity === 'act' ? NATURAL_ACT_Z : NATURAL_WATCH_Z} robust SDs (${points(spread.sd, 2)} points) from the panel's median offset` : '';
    const threshold =
      severity === 'act'
        ? `BH q < ${t.fdrLevel} and |offset| ≥ ${t.level.actFraction * 100}% of the scale (${points(t.level.actFraction * range, 2)} points)${naturalText}`
        : `raw p < ${t.level.watchPValue} and |offset| ≥ ${t.level.watchFraction * 100}% of the scale (${points(t.level.watchFraction * range, 2)} points)${naturalText}`;
    const evidence = baseEvidence(pair, 'one-sample t test of per-session level offsets (assessor minus rest of panel)', threshold, {
      meanOffset: pair.test.mean,
      ciLow: pair.test.ciLow,
      ciHigh: pair.test.ciHigh,
      relativeOffsetPercent: (pair.test.mean / range) * 100,
      naturalOffsetSd: spread?.sd ?? null,
      robustZ: Number.isFinite(robustZ) ? robustZ : null,
      perSessionOffsets: pair.values,
    });
    const message = `Across the last ${sessionsText(pair.test.n)}, ${pair.assessor}'s ${pair.attribute} ratings averaged ${points(size)} points ${pair.test.mean > 0 ? 'above' : 'below'} the rest of the panel (95% CI ${points(pair.test.ciLow)} to ${points(pair.test.ciHigh)}).`;
    out.push(flag(kind, severity, pair, evidence, message));
  }
  return out;
}

/** Inconsistent: replicate SD persistently larger than the rest of the panel's (log SD ratio). */
export function repeatabilityFlags(ctx: FlagContext): Flag[] {
  const t = ctx.settings;
  const out: Flag[] = [];
  const pairs = pooledPairs(ctx, {
    value: (row) => (row.repeatabilitySdRatio !== null && row.repeatabilitySdRatio > 0 ? Math.log(row.repeatabilitySdRatio) : null),
    alternative: 'greater',
  });
  for (const pair of pairs) {
    const ratio = Math.exp(pair.test.mean);
    const severity: FlagSeverity | null =
      pair.qValue < t.fdrLevel && ratio > t.repeatability.actSdRatio ? 'act' : pair.test.pValue < t.repeatability.watchPValue && ratio > t.repeatability.watchSdRatio ? 'watch' : null;
    if (!severity) continue;
    const threshold = severity === 'act' ? `BH q < ${t.fdrLevel} and SD ratio > ${t.repeatability.actSdRatio}` : `raw p < ${t.repeatability.watchPValue} and SD ratio > ${t.repeatability.watchSdRatio}`;
    const evidence = baseEvidence(pair, 'one-sided one-sample t test of per-session log SD ratios (assessor vs rest of panel)', threshold, {
      geometricMeanSdRatio: ratio,
      ciLow: Math.exp(pair.test.ciLow),
      ciHigh: Math.exp(pair.test.ciHigh),
    });
    const message = `Across the last ${sessionsText(pair.test.n)}, the spread between ${pair.assessor}'s repeated ${pair.attribute} ratings of the same product was ${points(ratio)} times that of the rest of the panel (95% CI ${points(Math.exp(pair.test.ciLow))} to ${points(Math.exp(pair.test.ciHigh))}).`;
    out.push(flag('inconsistent', severity, pair, evidence, message));
  }
  return out;
}

/**
 * Non-discriminating: among sessions where the panel separates the products (panel p below
 * `panelPValueMax`), the assessor's own product test is mostly not significant, and their log F is
 * persistently below the panel median log F of the same session (relative test, so a hard product
 * set does not flag everybody).
 */
export function discriminationFlags(ctx: FlagContext): Flag[] {
  const t = ctx.settings;
  const d = t.discrimination;
  const counted = (row: AssessorSessionIndices, result: SessionAttributeResult) =>
    result.productTestP !== null && result.productTestP < d.panelPValueMax && row.discriminationF !== null && row.discriminationF > 0 && row.discriminationP !== null;
  const panelMedian = (row: AssessorSessionIndices, result: SessionAttributeResult): number | null => {
    const others = othersOf(result, row.assessor).filter((o) => o.discriminationF !== null && o.discriminationF > 0).map((o) => Math.log(o.discriminationF as number));
    return others.length >= 2 ? median(others) : null;
  };
  const pairs = pooledPairs(ctx, {
    value: (row, result) => {
      if (!counted(row, result)) return null;
      const reference = panelMedian(row, result);
      if (reference === null) return null;
      return Math.log(row.discriminationF as number) - reference;
    },
    companion: (row) => row.discriminationP,
    alternative: 'less',
  });
  const out: Flag[] = [];
  for (const pair of pairs) {
    const ps = pair.companions;
    const shareWatch = ps.filter((p) => p > d.watchPValue).length / ps.length;
    const shareAct = ps.filter((p) => p > d.actPValue).length / ps.length;
    const severity: FlagSeverity | null =
      shareAct >= d.shareOfSessions && pair.qValue < t.fdrLevel ? 'act' : shareWatch >= d.shareOfSessions && pair.test.pValue < t.level.watchPValue ? 'watch' : null;
    if (!severity) continue;
    const nNot = ps.filter((p) => p > (severity === 'act' ? d.actPValue : d.watchPValue)).length;
    const threshold =
      severity === 'act'
        ? `own product test p > ${d.actPValue} in ≥ ${d.shareOfSessions * 100}% of sessions where the panel p < ${d.panelPValueMax}, and BH q < ${t.fdrLevel} for log F below the panel median`
        : `own product test p > ${d.watchPValue} in ≥ ${d.shareOfSessions * 100}% of sessions where the panel p < ${d.panelPValueMax}, and raw p < ${t.level.watchPValue} for log F below the panel median`;
    const evidence = baseEvidence(pair, 'one-sided one-sample t test of per-session log F minus the panel median log F', threshold, {
      perSessionProductP: ps,
      shareNotDiscriminating: severity === 'act' ? shareAct : shareWatch,
      meanLogFBelowPanel: -pair.test.mean,
    });
    const message = `In ${nNot} of the last ${sessionsText(ps.length)} where the panel separated the products on ${pair.attribute}, ${pair.assessor}'s own ratings did not separate them (product test p > ${severity === 'act' ? d.actPValue : d.watchPValue}).`;
    out.push(flag('non-discriminating', severity, pair, evidence, message));
  }
  return out;
}

/** Disagreement and reversed: correlation of the assessor's product profile with the rest of the panel. */
export function agreementFlags(ctx: FlagContext): Flag[] {
  const t = ctx.settings;
  const a = t.agreement;
  const counted = (row: AssessorSessionIndices, result: SessionAttributeResult) =>
    row.agreementR !== null && row.nProducts >= a.minProducts && result.productTestP !== null && result.productTestP < a.panelPValueMax;
  const z = (r: number) => Math.atanh(Math.max(-0.999, Math.min(0.999, r)));
  const panelMedianZ = (row: AssessorSessionIndices, result: SessionAttributeResult): number | null => {
    const others = othersOf(result, row.assessor).filter((o) => o.agreementR !== null).map((o) => z(o.agreementR as number));
    return others.length >= 2 ? median(others) : null;
  };
  const out: Flag[] = [];
  // Reversed: mean atanh r below 0.
  const reversedPairs = pooledPairs(ctx, { value: (row, result) => (counted(row, result) ? z(row.agreementR as number) : null), alternative: 'less' });
  const reversedKeys = new Set<string>();
  for (const pair of reversedPairs) {
    const pooledR = Math.tanh(pair.test.mean);
    if (!(pooledR < a.reversedR)) continue;
    const severity: FlagSeverity | null = pair.qValue < t.fdrLevel ? 'act' : pair.test.pValue < t.level.watchPValue ? 'watch' : null;
    if (!severity) continue;
    reversedKeys.add(`${pair.assessor}\u0000${pair.attribute}`);
    const threshold = severity === 'act' ? `pooled r < ${a.reversedR} and BH q < ${t.fdrLevel}` : `pooled r < ${a.reversedR} and raw p < ${t.level.watchPValue}`;
    const evidence = baseEvidence(pair, 'one-sided one-sample t test of per-session atanh(r) < 0, r = correlation with the rest of the panel', threshold, {
      pooledR,
      ciLow: Math.tanh(pair.test.ciLow),
      ciHigh: Math.tanh(pair.test.ciHigh),
      perSessionR: pair.values.map(Math.tanh),
    });
    const message = `Across the last ${sessionsText(pair.test.n)}, ${pair.assessor}'s ${pair.attribute} ratings ordered the products opposite to the rest of the panel (average correlation ${points(pooledR, 2)}, 95% CI ${points(Math.tanh(pair.test.ciLow), 2)} to ${points(Math.tanh(pair.test.ciHigh), 2)}).`;
    out.push(flag('reversed', severity, pair, evidence, message));
  }
  const disagreementPairs = pooledPairs(ctx, {
    value: (row, result) => {
      if (!counted(row, result)) return null;
      const reference = panelMedianZ(row, result);
      return reference === null ? null : z(row.agreementR as number) - reference;
    },
    companion: (row, result) => (counted(row, result) ? z(row.agreementR as number) : null),
    alternative: 'less',
  });
  for (const pair of disagreementPairs) {
    if (reversedKeys.has(`${pair.assessor}\u0000${pair.attribute}`)) continue;
    const ownZ = pair.companions.reduce((s, v) => s + v, 0) / pair.companions.length;
    const pooledR = Math.tanh(ownZ);
    const panelR = Math.tanh(ownZ - pair.test.mean);
    const severity: FlagSeverity | null =
      pair.qValue < t.fdrLevel && pooledR < a.watchR
        ? 'act'
        : pair.test.pValue < t.level.watchPValue && (pooledR < a.watchR || panelR - pooledR >= a.watchDropFromPanel)
          ? 'watch'
          : null;
    if (!severity) continue;
    const threshold =
      severity === 'act'
        ? `BH q < ${t.fdrLevel} (r below the panel median) and pooled r < ${a.watchR}`
        : `raw p < ${t.level.watchPValue} (r below the panel median) and pooled r < ${a.watchR} or ≥ ${a.watchDropFromPanel} below the panel median r`;
    const evidence = baseEvidence(pair, 'one-sided one-sample t test of per-session atanh(r) minus the panel median atanh(r)', threshold, {
      pooledR,
      panelMedianR: panelR,
      perSessionR: pair.companions.map(Math.tanh),
    });
    const message = `Across the last ${sessionsText(pair.test.n)}, ${pair.assessor}'s ${pair.attribute} product profile agreed less with the rest of the panel than usual (average correlation ${points(pooledR, 2)} against a panel median of ${points(panelR, 2)}).`;
    out.push(flag('disagreement', severity, pair, evidence, message));
  }
  return out;
}

/** Scale compression (β < 1) and expansion (β > 1) of product differences, pooled log β. */
export function scalingFlags(ctx: FlagContext): Flag[] {
  const t = ctx.settings;
  const s = t.scaling;
  const pairs = pooledPairs(ctx, {
    value: (row, result) =>
      row.scaling !== null && row.scaling > 0 && result.productTestP !== null && result.productTestP < s.panelPValueMax ? Math.log(row.scaling) : null,
    alternative: 'two-sided',
  });
  const out: Flag[] = [];
  for (const pair of pairs) {
    const beta = Math.exp(pair.test.mean);
    const compressed = beta < 1;
    const beyondAct = compressed ? beta < s.actLow : beta > s.actHigh;
    const beyondWatch = compressed ? beta < s.watchLow : beta > s.watchHigh;
    const severity: FlagSeverity | null = pair.qValue < t.fdrLevel && beyondAct ? 'act' : pair.test.pValue < t.level.watchPValue && beyondWatch ? 'watch' : null;
    if (!severity) continue;
    const bound = severity === 'act' ? (compressed ? s.actLow : s.actHigh) : compressed ? s.watchLow : s.watchHigh;
    const threshold = `${severity === 'act' ? `BH q < ${t.fdrLevel}` : `raw p < ${t.level.watchPValue}`} and pooled β ${compressed ? '<' : '>'} ${bound}`;
    const evidence = baseEvidence(pair, 'one-sample t test of per-session log scaling coefficients (β = 1 means the panel’s spacing)', threshold, {
      pooledScaling: beta,
      ciLow: Math.exp(pair.test.ciLow),
      ciHigh: Math.exp(pair.test.ciHigh),
    });
    const message = `Across the last ${sessionsText(pair.test.n)}, ${pair.assessor} spread the products ${points(beta, 2)} times as widely as the rest of the panel on ${pair.attribute} (95% CI ${points(Math.exp(pair.test.ciLow), 2)} to ${points(Math.exp(pair.test.ciHigh), 2)}).`;
    out.push(flag(compressed ? 'scale-compression' : 'scale-expansion', severity, pair, evidence, message));
  }
  return out;
}
