/** Shared pieces of the monitor pages: links, the review notice, chart designs, flag display. */
import { evidenceRows } from './case-evidence.js';
import type { ChartDesigns } from '../analysis/monitor/chart.js';
import type { Flag, FlagKind, FlagSeverity } from '../domain/flags.js';
import { HOME_CRUMB, panelHref, pathSegment, type Breadcrumb } from './page-common.js';

export function monitorHref(panel: string, page?: 'flags' | 'retraining' | 'events' | 'products' | 'control' | 'settings'): string {
  return `${panelHref(panel)}/monitor${page ? `/${page}` : ''}`;
}

export function assessorMonitorHref(panel: string, assessor: string, attribute?: string): string {
  const base = `${panelHref(panel)}/monitor/assessors/${pathSegment(assessor)}`;
  return attribute === undefined ? base : `${base}?attribute=${encodeURIComponent(attribute)}`;
}

export function monitorCrumbs(panel: string, here: string | null): Breadcrumb[] {
  const crumbs: Breadcrumb[] = [HOME_CRUMB, { label: panel, href: panelHref(panel) }];
  crumbs.push({ label: 'Monitor', href: here === null ? null : monitorHref(panel) });
  if (here !== null) crumbs.push({ label: here, href: null });
  return crumbs;
}

/** Shown on every monitor page (DEVELOPERS.md, conventions): what a flag is and is not. */
export const REVIEW_NOTICE = [
  'Flags are evidence for review, not verdicts: each names the test, the numbers, n and the threshold, for the panel leader to weigh.',
  'No flag is not proof of good performance: it only means no test crossed its threshold with the data available (see the sample sizes).',
] as const;

/**
 * Chart designs for display when the panel's thresholds do not set them: EWMA λ = 0.2, L = 2.962
 * (in-control ARL ≈ 500, Lucas & Saccucci 1990), CUSUM k = 0.5, h = 5 (ARL ≈ 465, Montgomery),
 * Western Electric rules 1–4 (Western Electric 1956); methods notes §3.3–3.5.
 */
export const DEFAULT_CHART_DESIGNS: ChartDesigns = {
  ewma: { lambda: 0.2, L: 2.962 },
  cusum: { k: 0.5, h: 5 },
  rules: [1, 2, 3, 4],
};

export interface EvidenceItem {
  name: string;
  value: string;
}

/**
 * A flag's evidence as labelled lines for a page (report/case-evidence.ts): readable values with
 * units, one p-value format; raw field names and nested objects only in the JSON twin.
 */
export function evidenceItems(flag: Flag): EvidenceItem[] {
  return evidenceRows(flag).map((row) => ({ name: row.label, value: row.value }));
}

export interface KindCount {
  kind: FlagKind;
  act: number;
  watch: number;
}

export function countByKind(flags: readonly Flag[]): KindCount[] {
  const counts = new Map<FlagKind, KindCount>();
  for (const f of flags) {
    let c = counts.get(f.kind);
    if (!c) counts.set(f.kind, (c = { kind: f.kind, act: 0, watch: 0 }));
    c[f.severity satisfies FlagSeverity] += 1;
  }
  return [...counts.values()].sort((a, b) => a.kind.localeCompare(b.kind));
}

export interface RefitStatusView {
  /** 'queued' | 'running' | 'done' | 'failed', or null when no refit has run. */
  status: string | null;
  nDone: number;
  nTasks: number;
  message: string | null;
  /** When the current flags were built; null when never. */
  flagsBuiltAt: string | null;
  /** The same instant in the server's local time, for the page ("4 Dec 2026, 15:40"). */
  flagsBuiltAtText: string | null;
  /** The stored results are older than the ratings (a refit is due or running). */
  isStale: boolean;
}
