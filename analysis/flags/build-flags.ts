/**
 * The flag engine: buildFlags(history, settings) → Flag[] in the contract of domain/flags.ts.
 * Rules: pooled index tests with BH within each family (index-flags.ts), sized control charts for
 * drift (drift-flags.ts), product-effect stability (product-flags.ts), data-quality checks on
 * ratings (quality-flags.ts) and import findings (finding-flags.ts). Pure; no clock, no I/O.
 */
import type { Flag, FlagKind } from '../../domain/flags.js';
import type { PanelHistory } from '../monitor/series.js';
import type { ChartSizingMemo } from '../monitor/sizing-memo.js';
import { buildContext, type FlagContext } from './context.js';
import { driftFlags } from './drift-flags.js';
import { findingFlags } from './finding-flags.js';
import { agreementFlags, discriminationFlags, levelFlags, repeatabilityFlags, scalingFlags } from './index-flags.js';
import { productFlags } from './product-flags.js';
import { createQualityFlagsMemo, qualityFlags, type QualityFlagsMemo } from './quality-flags.js';
import { DEFAULT_THRESHOLDS, type PanelThresholds } from './settings.js';
import { points, sessionsText } from './format.js';

/**
 * What a caller that builds flags again and again (the refit's flags phase) keeps between builds,
 * so work on unchanged sessions is not repeated; made by the caller, never module state, so the
 * flags are a function of the history and settings alone.
 */
export interface FlagsMemo {
  quality: QualityFlagsMemo;
}

export function createFlagsMemo(): FlagsMemo {
  return { quality: createQualityFlagsMemo() };
}

export interface BuildFlagsOptions {
  /** Keep only flags whose evidence reaches this session or later. */
  since?: string;
  /** Results of earlier builds to reuse (same flags with or without). */
  memo?: FlagsMemo;
  /** Chart sizings kept between builds by the caller (a worker keeps one); a fresh one per build when absent. */
  sizingMemo?: ChartSizingMemo;
}

export function buildFlags(history: PanelHistory, settings: PanelThresholds = DEFAULT_THRESHOLDS, options: BuildFlagsOptions = {}): Flag[] {
  const ctx = buildContext(history, settings, options.sizingMemo);
  const perAttribute = [
    ...levelFlags(ctx),
    ...repeatabilityFlags(ctx),
    ...discriminationFlags(ctx),
    ...agreementFlags(ctx),
    ...scalingFlags(ctx),
  ];
  let flags = [...collapseToAssessorWide(ctx, perAttribute), ...driftFlags(ctx), ...productFlags(ctx), ...qualityFlags(ctx, options.memo?.quality), ...findingFlags(ctx)];
  if (options.since !== undefined) {
    const sinceIndex = ctx.sessionOrder.get(options.since);
    if (sinceIndex !== undefined) {
      flags = flags.filter((f) => {
        const last = typeof f.evidence.lastSession === 'string' ? f.evidence.lastSession : f.firstSession;
        return (ctx.sessionOrder.get(last) ?? Number.POSITIVE_INFINITY) >= sinceIndex;
      });
    }
  }
  return flags.sort(
    (a, b) =>
      (a.severity === b.severity ? 0 : a.severity === 'act' ? -1 : 1) ||
      a.kind.localeCompare(b.kind) ||
      (a.assessor ?? '').localeCompare(b.assessor ?? '') ||
      (a.attribute ?? '').localeCompare(b.attribute ?? '') ||
      (a.product ?? '').localeCompare(b.product ?? '') ||
      (ctx.sessionOrder.get(a.firstSession) ?? 0) - (ctx.sessionOrder.get(b.firstSession) ?? 0),
  );
}

const MAIN_NUMBER: Partial<Record<FlagKind, { field: string; unit: (value: number) => string }>> = {
  lenient: { field: 'meanOffset', unit: (v) => `${points(Math.abs(v))} points above the rest of the panel` },
  harsh: { field: 'meanOffset', unit: (v) => `${points(Math.abs(v))} points below the rest of the panel` },
  inconsistent: { field: 'geometricMeanSdRatio', unit: (v) => `a replicate spread ${points(v)} times the rest of the panel's` },
  'non-discriminating': { field: 'shareNotDiscriminating', unit: (v) => `no product separation in ${Math.round(v * 100)}% of the sessions where the panel separated them` },
  disagreement: { field: 'pooledR', unit: (v) => `an average correlation of ${points(v, 2)} with the rest of the panel` },
  reversed: { field: 'pooledR', unit: (v) => `an average correlation of ${points(v, 2)} with the rest of the panel` },
  'scale-compression': { field: 'pooledScaling', unit: (v) => `product differences spread ${points(v, 2)} times as widely as the rest of the panel` },
  'scale-expansion': { field: 'pooledScaling', unit: (v) => `product differences spread ${points(v, 2)} times as widely as the rest of the panel` },
};

/**
 * When the same index flags an assessor on at least 3 attributes and on at least half of the
 * attributes with data, one assessor-wide flag (attribute null) replaces the per-attribute ones;
 * it is act when the index is act on ≥ 3 attributes (methods §6.3, assessor-level summary).
 */
function collapseToAssessorWide(ctx: FlagContext, flags: Flag[]): Flag[] {
  const groups = new Map<string, Flag[]>();
  for (const f of flags) {
    const key = `${f.kind}\u0000${f.assessor}`;
    groups.set(key, [...(groups.get(key) ?? []), f]);
  }
  const out: Flag[] = [];
  const nAttributes = ctx.history.attributes.length;
  for (const group of groups.values()) {
    const template = MAIN_NUMBER[group[0].kind];
    if (!template || group.length < 3 || group.length < nAttributes / 2) {
      out.push(...group);
      continue;
    }
    const nAct = group.filter((f) => f.severity === 'act').length;
    const values = group.map((f) => Number(f.evidence[template.field])).filter(Number.isFinite);
    const average = values.reduce((s, v) => s + v, 0) / values.length;
    const firstSession = group.map((f) => f.firstSession).sort((a, b) => (ctx.sessionOrder.get(a) ?? 0) - (ctx.sessionOrder.get(b) ?? 0))[0];
    const nSessions = Math.max(...group.map((f) => f.evidence.n));
    const minP = Math.min(...group.map((f) => (typeof f.evidence.pValue === 'number' ? f.evidence.pValue : 1)));
    const minQ = Math.min(...group.map((f) => (typeof f.evidence.qValue === 'number' ? f.evidence.qValue : 1)));
    out.push({
      kind: group[0].kind,
      assessor: group[0].assessor,
      product: null,
      attribute: null,
      firstSession,
      severity: nAct >= 3 ? 'act' : 'watch',
      evidence: {
        test: `${group[0].evidence.test}, on each attribute`,
        statistic: average,
        pValue: minP,
        qValue: minQ,
        n: nSessions,
        threshold: `flagged on ≥ 3 attributes and ≥ half of the attributes; act when act on ≥ 3 attributes (${nAct} act, ${group.length - nAct} watch)`,
        lastSession: group[0].evidence.lastSession,
        nAttributesFlagged: group.length,
        nAttributes,
        attributes: group.map((f) => ({ attribute: f.attribute, severity: f.severity, [template.field]: f.evidence[template.field], pValue: f.evidence.pValue, qValue: f.evidence.qValue })),
      },
      message: `Across the last ${sessionsText(nSessions)}, ${group[0].assessor}'s ratings showed ${template.unit(average)} on average on ${group.length} of ${nAttributes} attributes.`,
    });
  }
  return out;
}
