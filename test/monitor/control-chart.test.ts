/**
 * Chart geometry: values land where the scales put them (d3-scale's documented point and linear
 * scales), gaps stay gaps, provisional limits are dashed, signals and events are marked, and the
 * monitor chart inputs carry the baseline's centre ± 3σ (methods §3.3) and the EWMA limits.
 */
import { describe, expect, it } from 'vitest';
import { monitorSeries, type SeriesPoint } from '../../analysis/monitor/chart.js';
import { buildControlChart } from '../../report/charts/control-chart.js';
import { monitorChartInputs } from '../../report/charts/monitor-charts.js';
import { DEFAULT_CHART_DESIGNS } from '../../report/monitor-common.js';

describe('buildControlChart', () => {
  const chart = buildControlChart({
    title: 'Level',
    yLabel: 'offset',
    sessions: ['S1', 'S2', 'S3', 'S4'],
    series: [{ name: 'value', values: [0, 1, null, 2], signals: [null, null, null, 'act'] }],
    lines: [
      { name: 'centre', kind: 'centre', values: 1 },
      { name: '+3σ', kind: 'limit', values: 3 },
    ],
    isProvisional: true,
    events: [
      { session: 'S2', label: 'retraining' },
      { session: 'S9', label: 'not a session here' },
    ],
    description: 'test',
  });

  it('places sessions evenly with half a step of padding, and values on a linear y scale', () => {
    const step = chart.plot.width / 4; // scalePoint with padding 0.5: n points, n steps
    const xs = chart.series[0].points.map((p) => p.cx);
    expect(xs[0]).toBeCloseTo(chart.plot.left + step / 2, 1);
    expect(xs[2]).toBeCloseTo(chart.plot.left + 3.5 * step, 1); // S4 (S3 has no value)
    const ys = chart.series[0].points.map((p) => p.cy);
    expect(ys[0] - ys[1]).toBeCloseTo((ys[1] - ys[2]) / 1, 1); // 0→1 and 1→2: equal distances
    expect(ys[0]).toBeGreaterThan(ys[1]); // larger values higher up
  });

  it('leaves a gap where a value is missing and marks signals and events', () => {
    expect(chart.series[0].path.match(/M/g)).toHaveLength(2);
    expect(chart.series[0].points).toHaveLength(3);
    expect(chart.nSignals).toBe(1);
    expect(chart.series[0].points[2]).toMatchObject({ session: 'S4', isSignal: true, severity: 'act' });
    expect(chart.events.map((e) => e.label)).toEqual(['retraining']);
    expect(chart.events[0].x).toBeCloseTo(chart.series[0].points[1].cx, 6);
  });

  it('draws limits dashed only when provisional, the centre line always solid', () => {
    expect(chart.lines.map((l) => [l.name, l.isDashed])).toEqual([
      ['centre', false],
      ['+3σ', true],
    ]);
    const final = buildControlChart({ ...chartInput(), isProvisional: false });
    expect(final.lines.every((l) => !l.isDashed)).toBe(true);
  });

  it('says when there is nothing to chart', () => {
    const empty = buildControlChart({ ...chartInput(), series: [{ name: 'v', values: [null, null] }], sessions: ['S1', 'S2'] });
    expect(empty.isEmpty).toBe(true);
  });
});

function chartInput() {
  return {
    title: 't',
    yLabel: 'y',
    sessions: ['S1', 'S2'],
    series: [{ name: 'v', values: [1, 2] }],
    lines: [{ name: 'limit', kind: 'limit' as const, values: 3 }],
    isProvisional: true,
    events: [],
    description: 'd',
  };
}

describe('monitorChartInputs', () => {
  // 12 values with a known moving range: alternating 0 and 1 → MR̄ = 1, σ̂ = 1/1.128; then a jump.
  const values = [0, 1, 0, 1, 0, 1, 0, 1, 0, 1, 0, 9];
  const series: SeriesPoint[] = values.map((value, i) => ({ session: `S${i + 1}`, date: `2026-01-${String(i + 1).padStart(2, '0')}`, value }));
  const options = { baseline: { fullValues: 20, minimumValues: 8 } };
  const segments = monitorSeries(series, DEFAULT_CHART_DESIGNS, options);
  const inputs = monitorChartInputs({
    title: 'x',
    yLabel: 'y',
    sessions: series.map((p) => p.session),
    series,
    segments,
    designs: DEFAULT_CHART_DESIGNS,
    events: [],
    role: 'index',
    owner: { assessor: 'A1', attribute: 'x' },
    flags: [],
  });

  it('individuals chart: centre and ±3σ limits from the baseline, provisional with fewer than 20 values', () => {
    const { centre, spreadSd } = segments[0].baseline;
    expect(spreadSd).toBeCloseTo(((10 / 11) * 1 + (1 / 11) * 9) / 1.128, 10); // MR̄ over the 11 ranges
    const lines = inputs.individuals.lines;
    expect((lines[0].values as number[])[0]).toBe(centre);
    expect((lines[1].values as number[])[0]).toBeCloseTo(centre! + 3 * spreadSd!, 12);
    expect((lines[2].values as number[])[0]).toBeCloseTo(centre! - 3 * spreadSd!, 12);
    expect(inputs.individuals.isProvisional).toBe(true);
    expect(inputs.baselineStatus).toBe('provisional');
    expect(inputs.nReference).toBe(12);
  });

  it('EWMA chart: the statistic and its exact limits from the monitored points', () => {
    const points = segments[0].points;
    expect(inputs.ewma.series[0].values).toEqual(points.map((p) => p.ewma));
    expect(inputs.ewma.lines[1].values).toEqual(points.map((p) => p.ewmaLimit));
    expect(inputs.ewma.series[0].signals!.some((s) => s === 'act')).toBe(points.some((p) => p.ewmaSignal !== null));
  });

  it('individuals signals: rule 1 (beyond 3σ) is act', () => {
    const last = segments[0].points.at(-1)!;
    expect(last.rules).toContain(1);
    expect(inputs.individuals.series[0].signals!.at(-1)).toBe('act');
  });
});
