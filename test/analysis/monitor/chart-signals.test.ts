/**
 * What each drawn signal means (docs/methods.md §3.11): the classification of chartSignals and the
 * case linking of linkSignals on small hand-made charts, so each reason is seen at least once
 * (the simulated panels of chart-flag-agreement.test.ts have no restarts or control-product cases).
 */
import { describe, expect, it } from 'vitest';
import { linkSignals } from '../../../report/charts/chart-links.js';
import { monitorSeries, type SeriesPoint } from '../../../analysis/monitor/chart.js';
import { chartSignals } from '../../../report/charts/chart-signals.js';
import type { Flag } from '../../../domain/flags.js';

const DESIGNS = { ewma: { lambda: 0.2, L: 2.962 }, cusum: { k: 0.5, h: 5 }, rules: [1] as const };
// Alternating 0/1 for 10 sessions (σ̂ from MR̄ = 1), then a lasting step of +3 points, twice: a
// restart at S21 starts a second segment that repeats the pattern.
const values = [...Array.from({ length: 10 }, (_, i) => i % 2), 3, 3.5, 3, 3.5, 3, 3.5, 3, 3.5, 3, 3.5];
const series: SeriesPoint[] = [...values, ...values].map((value, i) => ({ session: `S${i + 1}`, date: `2026-01-01`, value }));
const sessions = series.map((p) => p.session);
const segments = monitorSeries(series, DESIGNS, { baseline: { fullValues: 10, minimumValues: 8 }, restartSessions: ['S21'] });

function driftFlag(attribute: string | null, firstSession: string, signalSession: string): Flag {
  return { kind: 'drift', assessor: 'A1', product: null, attribute, firstSession, severity: 'act', evidence: { signalSession }, message: 'm' } as unknown as Flag;
}

describe('chart signals and their cases', () => {
  it('level chart: EWMA in the current segment is read by the drift rule, the earlier segment is not, CUSUM dates changes', () => {
    expect(segments).toHaveLength(2);
    const signals = chartSignals(segments, 'level-attribute', false);
    const earlier = signals.filter((s) => sessions.indexOf(s.session) < 20);
    const current = signals.filter((s) => sessions.indexOf(s.session) >= 20);
    expect(earlier.length).toBeGreaterThan(0);
    expect(earlier.every((s) => s.reason === 'earlier-baseline' && s.flagKind === null)).toBe(true);
    expect(current.filter((s) => s.chart === 'ewma').every((s) => s.flagKind === 'drift' && s.reason === null)).toBe(true);
    expect(current.filter((s) => s.chart === 'cusum').every((s) => s.reason === 'cusum-dates-change')).toBe(true);
    expect(current.filter((s) => s.chart === 'individuals').every((s) => s.reason === 'single-value')).toBe(true);
  });

  it('index and control charts raise no case: stated reasons', () => {
    const index = chartSignals(segments, 'index', false).filter((s) => sessions.indexOf(s.session) >= 20);
    expect(index.length).toBeGreaterThan(0);
    expect(index.filter((s) => s.chart !== 'cusum').every((s) => s.reason === 'pooled-window')).toBe(true);
    expect(chartSignals(segments, 'control', false).filter((s) => sessions.indexOf(s.session) >= 20).every((s) => s.reason === 'no-case-from-chart')).toBe(true);
  });

  it('a read signal belongs to the case that covers it, or is reported as having no open case', () => {
    const signals = chartSignals(segments, 'level-attribute', false);
    const firstEwma = signals.find((s) => s.chart === 'ewma' && sessions.indexOf(s.session) >= 20)!;
    const covered = linkSignals(signals, [driftFlag('x', 'S21', firstEwma.session)], { assessor: 'A1', attribute: 'x' }, sessions);
    expect(covered.filter((s) => s.flagKind === 'drift').every((s) => 'flag' in s.link)).toBe(true);
    // Values beyond ±3σ and CUSUM signals inside the case are part of it; the earlier segment keeps its reason.
    expect(covered.filter((s) => sessions.indexOf(s.session) >= 20).every((s) => 'flag' in s.link)).toBe(true);
    expect(covered.filter((s) => sessions.indexOf(s.session) < 20).every((s) => 'reason' in s.link && s.link.reason === 'earlier-baseline')).toBe(true);
    // Another assessor's case, or a case starting after the signal, does not cover it.
    const other = linkSignals(signals, [{ ...driftFlag('x', 'S21', firstEwma.session), assessor: 'A2' }], { assessor: 'A1', attribute: 'x' }, sessions);
    expect(other.filter((s) => s.flagKind === 'drift').every((s) => 'reason' in s.link && s.link.reason === 'no-open-case')).toBe(true);
    const later = linkSignals(signals, [driftFlag('x', 'S40', 'S40')], { assessor: 'A1', attribute: 'x' }, sessions);
    expect(later.some((s) => s.flagKind === 'drift' && 'reason' in s.link)).toBe(true);
    // An assessor-wide case summarises the attribute charts.
    const wide = linkSignals(signals, [driftFlag(null, 'S25', 'S25')], { assessor: 'A1', attribute: 'x' }, sessions);
    expect(wide.filter((s) => s.flagKind === 'drift').every((s) => 'flag' in s.link)).toBe(true);
  });

  it("product step chart: EWMA in the current segment belongs to that product's unstable-product case, not another product's or a drift case", () => {
    const signals = chartSignals(segments, 'product-step', false);
    const current = signals.filter((s) => sessions.indexOf(s.session) >= 20);
    expect(current.filter((s) => s.chart === 'ewma').every((s) => s.flagKind === 'unstable-product')).toBe(true);
    expect(current.filter((s) => s.chart === 'individuals').every((s) => s.reason === 'single-product-value')).toBe(true);
    const firstEwma = current.find((s) => s.chart === 'ewma')!;
    const step = (product: string): Flag =>
      ({ kind: 'unstable-product', assessor: null, product, attribute: 'x', firstSession: 'S21', severity: 'act', evidence: { signalSession: firstEwma.session }, message: 'm' }) as unknown as Flag;
    const owner = { assessor: null, attribute: 'x', product: 'T01' };
    const own = linkSignals(signals, [step('T01')], owner, sessions);
    expect(own.filter((s) => sessions.indexOf(s.session) >= 20).every((s) => 'flag' in s.link)).toBe(true);
    const others = linkSignals(signals, [step('T02'), { ...driftFlag('x', 'S21', firstEwma.session), assessor: null }], owner, sessions);
    expect(others.filter((s) => s.flagKind === 'unstable-product').every((s) => 'reason' in s.link && s.link.reason === 'no-open-case')).toBe(true);
  });

  it('a watch-level EWMA crossing (beyond the watch limit, inside the act limit) is drawn as watch and belongs to the chart\'s case, even before its first session', () => {
    const watchDesigns = { ...DESIGNS, rules: [1] as const, watchLimitWidthFor: () => 2.0, limitWidthFor: () => 2.962 };
    // Baseline 0/1 (σ̂ ≈ 0.89), then a small lasting shift: z ≈ 0.9, so the EWMA settles near 0.9,
    // beyond the watch limit (≈ 2.0 × 0.33) and inside the act limit (≈ 2.962 × 0.33).
    const small: SeriesPoint[] = [...Array.from({ length: 10 }, (_, i) => i % 2), ...Array.from({ length: 10 }, () => 1.3)].map((value, i) => ({ session: `S${i + 1}`, date: '2026-01-01', value }));
    const smallSessions = small.map((p) => p.session);
    const segs = monitorSeries(small, watchDesigns, { baseline: { fullValues: 10, minimumValues: 8 } });
    const signals = chartSignals(segs, 'level-attribute', false).filter((s) => s.chart === 'ewma');
    expect(signals.length).toBeGreaterThan(0);
    expect(signals.every((s) => s.severity === 'watch' && s.flagKind === 'drift')).toBe(true);
    const linked = linkSignals(signals, [driftFlag('x', 'S20', 'S20')], { assessor: 'A1', attribute: 'x' }, smallSessions);
    expect(linked.every((s) => 'flag' in s.link)).toBe(true);
    // Without a case it says so.
    expect(linkSignals(signals, [], { assessor: 'A1', attribute: 'x' }, smallSessions).every((s) => 'reason' in s.link && s.link.reason === 'no-open-case')).toBe(true);
  });
});
