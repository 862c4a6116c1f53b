/**
 * Before/after evidence for a retraining event (methods §6.4). The indices behind the
 * assessor's flags before the event are compared between the sessions before the event (the
 * recent window) and the sessions from the event on: per session, the assessor's index averaged
 * over attributes; improvement tested with a one-sided Welch t test (Welch 1947) on the per-session
 * values, "worse before than after". The flag is closed when every index concerned improved at
 * the set level, kept otherwise; with too few sessions after the event the answer is "wait".
 */
import type { FlagKind } from '../../domain/flags.js';
import type { AssessorSessionIndices } from '../indices/types.js';
import { tUpperTail } from '../distributions/index.js';
import type { PanelHistory } from '../monitor/series.js';
import type { ChartSizingMemo } from '../monitor/sizing-memo.js';
import { median } from '../monitor/series.js';
import { buildFlags, type FlagsMemo } from './build-flags.js';
import { points } from './format.js';
import type { PanelThresholds } from './settings.js';

export type RetrainingIndex = 'level' | 'repeatability' | 'discrimination' | 'agreement' | 'scaling';

/** Which index shows whether a flag kind got better, and its "badness" per session (larger = worse). */
const INDEX_OF_KIND: Partial<Record<FlagKind, RetrainingIndex>> = {
  lenient: 'level',
  harsh: 'level',
  drift: 'level',
  inconsistent: 'repeatability',
  'non-discriminating': 'discrimination',
  disagreement: 'agreement',
  reversed: 'agreement',
  'scale-compression': 'scaling',
  'scale-expansion': 'scaling',
};

const DESCRIPTION: Record<RetrainingIndex, string> = {
  level: 'absolute level offset from the rest of the panel (points)',
  repeatability: 'log of the replicate SD ratio to the rest of the panel',
  discrimination: 'minus the log product F (own ratings)',
  agreement: 'minus atanh of the correlation with the rest of the panel',
  scaling: 'absolute log scaling coefficient',
};

function badness(index: RetrainingIndex, row: AssessorSessionIndices): number | null {
  switch (index) {
    case 'level':
      return row.offset === null ? null : Math.abs(row.offset);
    case 'repeatability':
      return row.repeatabilitySdRatio !== null && row.repeatabilitySdRatio > 0 ? Math.log(row.repeatabilitySdRatio) : null;
    case 'discrimination':
      return row.discriminationF !== null && row.discriminationF > 0 ? -Math.log(row.discriminationF) : null;
    case 'agreement':
      return row.agreementR === null ? null : -Math.atanh(Math.max(-0.999, Math.min(0.999, row.agreementR)));
    case 'scaling':
      return row.scaling !== null && row.scaling > 0 ? Math.abs(Math.log(row.scaling)) : null;
  }
}

export interface WelchTest {
  t: number;
  df: number;
  /** One-sided: mean before > mean after. */
  pValue: number;
}

/** Welch's unequal-variance t test of mean(before) > mean(after); null with fewer than 2 values on a side. */
export function welchOneSided(before: readonly number[], after: readonly number[]): WelchTest | null {
  if (before.length < 2 || after.length < 2) return null;
  const stats = (v: readonly number[]) => {
    const m = v.reduce((s, x) => s + x, 0) / v.length;
    return { m, variance: v.reduce((s, x) => s + (x - m) ** 2, 0) / (v.length - 1), n: v.length };
  };
  const a = stats(before);
  const b = stats(after);
  const va = a.variance / a.n;
  const vb = b.variance / b.n;
  const se = Math.sqrt(va + vb);
  if (!(se > 0)) return { t: a.m > b.m ? Infinity : a.m < b.m ? -Infinity : 0, df: a.n + b.n - 2, pValue: a.m > b.m ? 0 : 1 };
  const t = (a.m - b.m) / se;
  const df = (va + vb) ** 2 / (va ** 2 / (a.n - 1) + vb ** 2 / (b.n - 1));
  return { t, df, pValue: tUpperTail(t, df) };
}

export interface RetrainingComparison {
  index: RetrainingIndex;
  description: string;
  /** Flag kinds before the event that this index speaks to. */
  kinds: FlagKind[];
  before: { sessions: string[]; values: number[]; mean: number | null };
  after: { sessions: string[]; values: number[]; mean: number | null };
  test: WelchTest | null;
  improved: boolean;
}

export interface RetrainingEvaluation {
  assessor: string;
  eventSession: string;
  decision: 'close' | 'keep' | 'wait';
  /** Flags for the assessor in the sessions before the event. */
  kindsBefore: FlagKind[];
  comparisons: RetrainingComparison[];
  nSessionsAfter: number;
  minSessionsAfter: number;
  pValueLevel: number;
  message: string;
}

/** `memo`: the caller's flags memo (the flags before the event reuse its per-session results); `sizingMemo`: its chart sizings. */
export function evaluateRetraining(
  history: PanelHistory,
  assessor: string,
  eventSession: string,
  settings: PanelThresholds,
  options: { memo?: FlagsMemo; sizingMemo?: ChartSizingMemo } = {},
): RetrainingEvaluation {
  const order = history.sessions.map((s) => s.label);
  const eventIndex = order.indexOf(eventSession);
  if (eventIndex < 0) throw new Error(`evaluateRetraining: session ${eventSession} is not in the history`);
  const beforeLabels = new Set(order.slice(0, eventIndex));
  const before: PanelHistory = {
    ...history,
    sessions: history.sessions.slice(0, eventIndex),
    results: history.results.filter((r) => beforeLabels.has(r.session)),
    ratings: history.ratings?.filter((r) => beforeLabels.has(r.session)),
    importFindings: [],
    events: history.events.filter((e) => beforeLabels.has(e.session)),
    periodFits: [],
  };
  const kindsBefore = [...new Set(buildFlags(before, settings, { memo: options.memo, sizingMemo: options.sizingMemo }).filter((f) => f.assessor === assessor).map((f) => f.kind))];
  const indices = new Map<RetrainingIndex, FlagKind[]>();
  for (const kind of kindsBefore) {
    const index = INDEX_OF_KIND[kind];
    if (index) indices.set(index, [...(indices.get(index) ?? []), kind]);
  }
  const windowBefore = order.slice(Math.max(0, eventIndex - settings.recentSessions), eventIndex);
  const after = order.slice(eventIndex);
  const perSession = (index: RetrainingIndex, sessions: string[]) => {
    const used: string[] = [];
    const values: number[] = [];
    for (const session of sessions) {
      const vs = history.results
        .filter((r) => r.session === session)
        .map((r) => r.indices.find((row) => row.assessor === assessor))
        .filter((row): row is AssessorSessionIndices => row !== undefined)
        .map((row) => badness(index, row))
        .filter((v): v is number => v !== null && Number.isFinite(v));
      if (vs.length > 0) {
        used.push(session);
        values.push(median(vs));
      }
    }
    return { sessions: used, values, mean: values.length ? values.reduce((s, v) => s + v, 0) / values.length : null };
  };
  const comparisons: RetrainingComparison[] = [...indices].map(([index, kinds]) => {
    const b = perSession(index, windowBefore);
    const a = perSession(index, after);
    const test = welchOneSided(b.values, a.values);
    return { index, description: DESCRIPTION[index], kinds, before: b, after: a, test, improved: test !== null && test.pValue < settings.retraining.pValue };
  });
  const nSessionsAfter = Math.min(after.length, ...comparisons.map((c) => c.after.values.length));
  const enough = nSessionsAfter >= settings.retraining.minSessionsAfter;
  const decision: RetrainingEvaluation['decision'] = comparisons.length === 0 ? 'close' : !enough ? 'wait' : comparisons.every((c) => c.improved) ? 'close' : 'keep';
  const summary = comparisons
    .map((c) => `${c.index} ${c.before.mean === null ? '–' : points(c.before.mean, 2)} before, ${c.after.mean === null ? '–' : points(c.after.mean, 2)} after${c.test ? ` (one-sided Welch p = ${c.test.pValue.toPrecision(2)})` : ''}`)
    .join('; ');
  const message =
    comparisons.length === 0
      ? `Before ${eventSession}, ${assessor} had no assessor flags that a before/after comparison could check.`
      : decision === 'wait'
        ? `${assessor} has ${nSessionsAfter} of the ${settings.retraining.minSessionsAfter} sessions needed after ${eventSession} to judge the retraining (${summary}).`
        : decision === 'close'
          ? `After the retraining at ${eventSession}, ${assessor}'s indices improved: ${summary}.`
          : `After the retraining at ${eventSession}, ${assessor}'s indices did not all improve: ${summary}.`;
  return {
    assessor,
    eventSession,
    decision,
    kindsBefore,
    comparisons,
    nSessionsAfter: comparisons.length ? nSessionsAfter : after.length,
    minSessionsAfter: settings.retraining.minSessionsAfter,
    pValueLevel: settings.retraining.pValue,
    message,
  };
}
