/**
 * From a monitored series (analysis/monitor/chart.ts) to the three chart inputs shown on the
 * pages: the individuals chart in the series' own units (centre μ̂0 and limits μ̂0 ± 3σ̂ per
 * baseline segment, Western Electric signals: rule 1 = act, rules 2–4 = watch, methods §3.3),
 * the EWMA chart with its exact limits and the two-sided CUSUM with ±h (both in SD units; a
 * signal = act, methods §3.4–3.5).
 */
import type { ChartDesigns, MonitoredSegment, SeriesPoint } from '../../analysis/monitor/chart.js';
import type { ChartEventInput, ChartInput, SignalSeverity } from './control-chart.js';

export interface MonitorChartInputs {
  individuals: ChartInput;
  ewma: ChartInput;
  cusum: ChartInput;
  /** Values used for the baseline of the last segment, and its status. */
  nReference: number;
  baselineStatus: 'final' | 'provisional' | 'none';
  /** The last segment's baseline came from the user's reference period (not its first values). */
  baselineFromReferencePeriod: boolean;
}

function emptyArray<T>(n: number, value: T): T[] {
  return Array.from({ length: n }, () => value);
}

export function monitorChartInputs(args: {
  title: string;
  yLabel: string;
  sessions: string[];
  series: readonly SeriesPoint[];
  segments: readonly MonitoredSegment[];
  designs: ChartDesigns;
  events: ChartEventInput[];
  size?: 'full' | 'small';
}): MonitorChartInputs {
  const { sessions, designs } = args;
  const n = sessions.length;
  const indexOf = new Map(sessions.map((s, i) => [s, i]));
  const raw = emptyArray<number | null>(n, null);
  for (const p of args.series) {
    const i = indexOf.get(p.session);
    if (i !== undefined && p.value !== null && Number.isFinite(p.value)) raw[i] = p.value;
  }
  const centre = emptyArray<number | null>(n, null);
  const upper = emptyArray<number | null>(n, null);
  const lower = emptyArray<number | null>(n, null);
  const individualsSignals = emptyArray<SignalSeverity | null>(n, null);
  const ruleNotes = emptyArray<string | null>(n, null);
  const ewma = emptyArray<number | null>(n, null);
  const ewmaUpper = emptyArray<number | null>(n, null);
  const ewmaLower = emptyArray<number | null>(n, null);
  const ewmaSignals = emptyArray<SignalSeverity | null>(n, null);
  const cusumUp = emptyArray<number | null>(n, null);
  const cusumDown = emptyArray<number | null>(n, null);
  const cusumSignals = emptyArray<SignalSeverity | null>(n, null);
  const hLine = emptyArray<number | null>(n, null);
  const hLineLow = emptyArray<number | null>(n, null);
  let isProvisional = false;
  for (const segment of args.segments) {
    const mu = segment.baseline.centre;
    // The spread the points were standardised with (own σ̂ or the panel-pooled floor).
    const spreadSd = segment.spreadUsedSd ?? segment.baseline.spreadSd;
    if (segment.baseline.status === 'provisional') isProvisional = true;
    if (mu === null || spreadSd === null) continue;
    const first = indexOf.get(segment.startSession) ?? 0;
    const lastPoint = segment.points[segment.points.length - 1];
    const last = lastPoint ? (indexOf.get(lastPoint.session) ?? first) : first;
    for (let i = first; i <= last; i++) {
      centre[i] = mu;
      upper[i] = mu + 3 * spreadSd;
      lower[i] = mu - 3 * spreadSd;
    }
    for (const p of segment.points) {
      const i = indexOf.get(p.session);
      if (i === undefined) continue;
      if (p.rules.length > 0) {
        individualsSignals[i] = p.rules.includes(1) ? 'act' : 'watch';
        ruleNotes[i] = `Western Electric rule ${p.rules.join(', ')} (shown for reading; flags come from the EWMA chart and the jump rule)`;
      }
      ewma[i] = p.ewma;
      ewmaUpper[i] = p.ewmaLimit;
      ewmaLower[i] = -p.ewmaLimit;
      ewmaSignals[i] = p.ewmaSignal ? 'act' : null;
      cusumUp[i] = p.cusumUpper;
      cusumDown[i] = -p.cusumLower;
      cusumSignals[i] = p.cusumSignal ? 'act' : null;
      hLine[i] = designs.cusum.h;
      hLineLow[i] = -designs.cusum.h;
    }
  }
  const lastSegment = args.segments[args.segments.length - 1];
  const nCharted = ewma.filter((v) => v !== null).length;
  const common = { sessions, events: args.events, isProvisional, size: args.size };
  return {
    individuals: {
      ...common,
      title: `${args.title}: individuals chart`,
      yLabel: args.yLabel,
      series: [{ name: 'value', values: raw, signals: individualsSignals, notes: ruleNotes }],
      lines: [
        { name: 'centre', kind: 'centre', values: centre },
        { name: '+3σ', kind: 'limit', values: upper },
        { name: '−3σ', kind: 'limit', values: lower },
      ],
      description: `${raw.filter((v) => v !== null).length} sessions with a value; centre and ±3σ limits from each baseline segment.`,
    },
    ewma: {
      ...common,
      title: `${args.title}: EWMA (λ = ${designs.ewma.lambda}, L = ${(lastSegment?.ewmaLimitWidth ?? designs.ewma.L).toFixed(3)})`,
      yLabel: 'EWMA of z (SD units)',
      series: [{ name: 'EWMA', values: ewma, signals: ewmaSignals }],
      lines: [
        { name: 'centre', kind: 'centre', values: ewma.map((v) => (v === null ? null : 0)) },
        { name: 'limit', kind: 'limit', values: ewmaUpper },
        { name: 'limit', kind: 'limit', values: ewmaLower },
      ],
      description: `${nCharted} standardised values; exact time-varying limits.`,
    },
    cusum: {
      ...common,
      title: `${args.title}: CUSUM (k = ${designs.cusum.k}, h = ${designs.cusum.h})`,
      yLabel: 'C⁺ and −C⁻ (SD units)',
      series: [
        { name: 'C⁺', values: cusumUp, signals: cusumSignals },
        { name: '−C⁻', values: cusumDown, signals: cusumSignals },
      ],
      lines: [
        { name: '+h', kind: 'limit', values: hLine },
        { name: '−h', kind: 'limit', values: hLineLow },
      ],
      description: `${nCharted} standardised values; upper and lower cumulative sums against the decision interval h.`,
    },
    nReference: lastSegment?.baseline.nReference ?? 0,
    baselineStatus: lastSegment?.baseline.status ?? 'none',
    baselineFromReferencePeriod: lastSegment?.baselineSource === 'reference-period',
  };
}
