/** Lookups shared by the flag rules, built once per buildFlags call. */
import type { AssessorSessionIndices } from '../indices/types.js';
import type { PanelHistory, SessionAttributeResult } from '../monitor/series.js';
import { createChartSizingMemo, type ChartSizingMemo } from '../monitor/sizing-memo.js';
import type { PanelThresholds } from './settings.js';

export interface FlagContext {
  history: PanelHistory;
  settings: PanelThresholds;
  /** Session label → 0-based position in time order. */
  sessionOrder: Map<string, number>;
  /** Attribute → scale range (max − min). */
  scaleRange: Map<string, number>;
  /** session\u0000attribute → stored result. */
  results: Map<string, SessionAttributeResult>;
  /** Assessors with any indices, sorted. */
  assessors: string[];
  /** The most recent `recentSessions` session labels, in time order. */
  recentWindow: string[];
  /** Chart sizings (limit widths, decision intervals, jump rules) kept for the caller; a fresh one per build when none is given. */
  sizingMemo: ChartSizingMemo;
}

export function resultKey(session: string, attribute: string): string {
  return `${session}\u0000${attribute}`;
}

export function buildContext(history: PanelHistory, settings: PanelThresholds, sizingMemo: ChartSizingMemo = createChartSizingMemo()): FlagContext {
  const sessionOrder = new Map(history.sessions.map((s, i) => [s.label, i]));
  const scaleRange = new Map(history.attributes.map((a) => [a.name, a.scaleMax - a.scaleMin]));
  const results = new Map<string, SessionAttributeResult>();
  const assessorSet = new Set<string>();
  for (const result of history.results) {
    results.set(resultKey(result.session, result.attribute), result);
    if (!scaleRange.has(result.attribute)) scaleRange.set(result.attribute, result.scaleMax - result.scaleMin);
    for (const row of result.indices) assessorSet.add(row.assessor);
  }
  const labels = history.sessions.map((s) => s.label);
  return {
    history,
    settings,
    sessionOrder,
    scaleRange,
    results,
    assessors: [...assessorSet].sort(),
    recentWindow: labels.slice(Math.max(0, labels.length - settings.recentSessions)),
    sizingMemo,
  };
}

/** The other assessors' rows of one session/attribute result. */
export function othersOf(result: SessionAttributeResult, assessor: string): AssessorSessionIndices[] {
  return result.indices.filter((row) => row.assessor !== assessor);
}
