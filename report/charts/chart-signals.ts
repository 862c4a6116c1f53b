/**
 * What each signal drawn on a chart means (docs/methods.md §3.11): the flag rule that reads it,
 * or the stated reason why no case comes from it. The rules restate what the flag engine reads
 * (analysis/flags/chart-signal.ts signalOfSegment, the jump rule, the pooled index tests);
 * test/analysis/monitor/chart-flag-agreement.test.ts holds the two together on every page type. One function for every chart the pages draw
 * (individuals, EWMA and CUSUM of the level charts, the index charts, the control-product charts),
 * so the pages, their JSON twins and the agreement test classify a signal the same way.
 *   - EWMA crossings of the act limit (act) or of the watch limit only (watch) in a level chart's
 *     current segment: read by the drift rule.
 *   - Western Electric rules 2–4 on the summary chart's current segment, when they give watch flags.
 *   - Signals in a segment closed by a restart: earlier baseline, not judged by the flags.
 *   - CUSUM: dates where a change began (the case's first session); it raises no case itself.
 *   - One value beyond ±3σ on a level chart: read by the jump rule only when most attributes
 *     jump together in that session; otherwise for reading.
 *   - Index charts (repeatability, discrimination, …): their cases pool the recent sessions.
 *   - Control-product charts: no case is raised from them.
 *   - Product step charts (a product's effect across sessions): EWMA crossings of the act limit in
 *     the current segment are read by the unstable-product step rule; a single value beyond ±3σ
 *     is for reading.
 */
import type { MonitoredSegment } from '../../analysis/monitor/chart.js';

/** Which chart set a chart belongs to, and so which flag rule (if any) reads it. */
export type ChartRole = 'level-summary' | 'level-attribute' | 'index' | 'control' | 'product-step';
export type ChartKind = 'individuals' | 'ewma' | 'cusum';
export type SignalReason = 'earlier-baseline' | 'cusum-dates-change' | 'single-value' | 'single-product-value' | 'pooled-window' | 'no-case-from-chart';

export interface DesignedSignal {
  session: string;
  chart: ChartKind;
  /** How the page draws it: act (beyond an act limit, rule 1) or watch (rules 2–4). */
  severity: 'act' | 'watch';
  /** The flag kind whose rule reads this signal, or null (then `reason` says why no case comes from it). */
  flagKind: 'drift' | 'unstable-product' | null;
  reason: SignalReason | null;
  /** Western Electric rules that fired (individuals chart). */
  rules?: number[];
}

/**
 * Every signal of a monitored chart with its flag rule or reason. `westernElectricWatch`: the
 * panel setting under which rules 2–4 on the summary chart give watch flags.
 */
export function chartSignals(segments: readonly MonitoredSegment[], role: ChartRole, westernElectricWatch: boolean): DesignedSignal[] {
  const out: DesignedSignal[] = [];
  const isLevel = role === 'level-summary' || role === 'level-attribute';
  const isProduct = role === 'product-step';
  const readBy = isLevel ? ('drift' as const) : isProduct ? ('unstable-product' as const) : null;
  const singleValue: SignalReason = isLevel ? 'single-value' : isProduct ? 'single-product-value' : role === 'index' ? 'pooled-window' : 'no-case-from-chart';
  segments.forEach((segment, index) => {
    const current = index === segments.length - 1;
    const otherwise = (reason: SignalReason): SignalReason => (current ? reason : 'earlier-baseline');
    for (const p of segment.points) {
      if (p.rules.length > 0) {
        const watchRules = p.rules.filter((r) => r !== 1);
        const readByDrift = current && role === 'level-summary' && westernElectricWatch && watchRules.length > 0;
        out.push({
          session: p.session,
          chart: 'individuals',
          severity: p.rules.includes(1) ? 'act' : 'watch',
          flagKind: readByDrift ? 'drift' : null,
          reason: readByDrift ? null : otherwise(singleValue),
          rules: [...p.rules],
        });
      }
      // Beyond the act limit, or between the watch and act limits (what a watch case reads).
      const ewmaSeverity = p.ewmaSignal ? 'act' : p.ewmaWatchLimit !== null && Math.abs(p.ewma) > p.ewmaWatchLimit ? 'watch' : null;
      if (ewmaSeverity) {
        const read = current && readBy !== null;
        out.push({ session: p.session, chart: 'ewma', severity: ewmaSeverity, flagKind: read ? readBy : null, reason: read ? null : otherwise(role === 'index' ? 'pooled-window' : 'no-case-from-chart') });
      }
      if (p.cusumSignal) out.push({ session: p.session, chart: 'cusum', severity: 'act', flagKind: null, reason: otherwise(role === 'control' ? 'no-case-from-chart' : 'cusum-dates-change') });
    }
  });
  return out;
}
