/**
 * From a monitored series (analysis/monitor/chart.ts) to the three chart inputs shown on the
 * pages: the individuals chart in the series' own units (centre μ̂0 and limits μ̂0 ± 3σ̂ per
 * baseline segment, Western Electric signals: rule 1 = act, rules 2–4 = watch, methods §3.3),
 * the EWMA chart with its exact limits and the two-sided CUSUM with ±h (both in SD units; a
 * signal = act, methods §3.4–3.5). Every signal carries the case it belongs to or the reason no
 * case comes from it (chart-signals.ts, chart-links.ts, §3.11).
 */
import { linkSignals, type ChartOwner, type LinkedSignal } from './chart-links.js';
import type { ChartDesigns, MonitoredSegment, SeriesPoint } from '../../analysis/monitor/chart.js';
import { chartSignals, type ChartKind, type ChartRole, type SignalReason } from './chart-signals.js';
import type { Flag } from '../../domain/flags.js';
import { kindLabel } from '../words.js';
import type { ChartEventInput, ChartInput, ChartLineInput, SignalReasonInput, SignalSeverity } from './control-chart.js';

/** Why a drawn signal raises no case, in plain words for the panel leader. */
export const SIGNAL_REASON_WORDS: Record<SignalReason | 'no-open-case', string> = {
  'earlier-baseline': 'before a restart of the baseline (retraining or a new control batch): cases judge the current baseline only',
  'cusum-dates-change': 'the CUSUM dates where a change began; it raises no case itself (cases come from the moving-average chart)',
  'single-value': 'one value beyond the ±3σ limits, shown for reading: a case needs the moving average to cross its limit, or most attributes to jump in the same session',
  'single-product-value': "one session's effect beyond the ±3σ limits, shown for reading: a product case needs the moving average to cross its limit",
  'pooled-window': 'one session beyond the ±3σ limits, shown for reading: cases on this measure pool the recent sessions',
  'no-case-from-chart': 'shown for reading: no case is raised from the control-product charts',
  'no-open-case': 'the case rule reads this chart here, but there is no open case: it has been reviewed, or the flags are older than the data',
};

function reasonOf(signal: LinkedSignal): SignalReasonInput {
  if ('flag' in signal.link) {
    const flag = signal.link.flag;
    return { code: 'case', text: `part of the open case “${kindLabel(flag.kind)}”${flag.attribute === null ? ' (all attributes)' : ` (${flag.attribute})`} since ${flag.firstSession}` };
  }
  return { code: signal.link.reason, text: SIGNAL_REASON_WORDS[signal.link.reason] };
}

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
  /** Which chart set this is (which flag rule reads it). */
  role: ChartRole;
  /** Whose chart it is, to find the case a signal belongs to. */
  owner: ChartOwner;
  /** The open cases (to link signals to). */
  flags: readonly Flag[];
  /** A line for what the values are compared with, in the series' units (e.g. 0 = the median of the other assessors). */
  reference?: { name: string; value: number };
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
  const reasons: Record<ChartKind, (SignalReasonInput | null)[]> = { individuals: emptyArray(n, null), ewma: emptyArray(n, null), cusum: emptyArray(n, null) };
  const weWatch = designs.rules.some((r) => r !== 1);
  for (const signal of linkSignals(chartSignals(args.segments, args.role, weWatch), args.flags, args.owner, sessions)) {
    const i = indexOf.get(signal.session);
    if (i !== undefined) reasons[signal.chart][i] = reasonOf(signal);
  }
  const ewma = emptyArray<number | null>(n, null);
  const ewmaUpper = emptyArray<number | null>(n, null);
  const ewmaLower = emptyArray<number | null>(n, null);
  const ewmaSignals = emptyArray<SignalSeverity | null>(n, null);
  const ewmaWatchUpper = emptyArray<number | null>(n, null);
  const ewmaWatchLower = emptyArray<number | null>(n, null);
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
      if (p.rules.length > 0) individualsSignals[i] = p.rules.includes(1) ? 'act' : 'watch';
      ewma[i] = p.ewma;
      ewmaUpper[i] = p.ewmaLimit;
      ewmaLower[i] = -p.ewmaLimit;
      const beyondWatch = p.ewmaWatchLimit !== null && Math.abs(p.ewma) > p.ewmaWatchLimit;
      ewmaSignals[i] = p.ewmaSignal ? 'act' : beyondWatch ? 'watch' : null;
      ewmaWatchUpper[i] = p.ewmaWatchLimit;
      ewmaWatchLower[i] = p.ewmaWatchLimit === null ? null : -p.ewmaWatchLimit;
      cusumUp[i] = p.cusumUpper;
      cusumDown[i] = -p.cusumLower;
      cusumSignals[i] = p.cusumSignal ? 'act' : null;
      hLine[i] = designs.cusum.h;
      hLineLow[i] = -designs.cusum.h;
    }
  }
  const lastSegment = args.segments[args.segments.length - 1];
  const referenceLine: ChartLineInput[] = args.reference ? [{ name: args.reference.name, kind: 'reference', values: raw.map(() => args.reference!.value) }] : [];
  const nCharted = ewma.filter((v) => v !== null).length;
  const hasWatchLimits = ewmaWatchUpper.some((v) => v !== null);
  const common = { sessions, events: args.events, isProvisional, size: args.size };
  return {
    individuals: {
      ...common,
      title: `${args.title}: individuals chart`,
      yLabel: args.yLabel,
      series: [{ name: 'value', values: raw, signals: individualsSignals, notes: ruleNotesOf(args.segments, sessions, indexOf), signalReasons: reasons.individuals }],
      lines: [
        ...referenceLine,
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
      series: [{ name: 'EWMA', values: ewma, signals: ewmaSignals, signalReasons: reasons.ewma }],
      lines: [
        { name: 'centre', kind: 'centre', values: ewma.map((v) => (v === null ? null : 0)) },
        { name: 'limit', kind: 'limit', values: ewmaUpper },
        { name: 'limit', kind: 'limit', values: ewmaLower },
        ...(hasWatchLimits
          ? [
              { name: 'watch', kind: 'limit' as const, values: ewmaWatchUpper },
              { name: 'watch', kind: 'limit' as const, values: ewmaWatchLower },
            ]
          : []),
      ],
      description: `${nCharted} standardised values; exact time-varying limits${hasWatchLimits ? ' (the outer pair for act, the inner pair for watch)' : ''}.`,
    },
    cusum: {
      ...common,
      title: `${args.title}: CUSUM (k = ${designs.cusum.k}, h = ${designs.cusum.h.toFixed(2)})`,
      yLabel: 'C⁺ and −C⁻ (SD units)',
      series: [
        { name: 'C⁺', values: cusumUp, signals: cusumSignals, signalReasons: reasons.cusum },
        { name: '−C⁻', values: cusumDown, signals: cusumSignals, signalReasons: reasons.cusum },
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

/** The Western Electric rules that fired at each session (hover text of the individuals chart). */
function ruleNotesOf(segments: readonly MonitoredSegment[], sessions: readonly string[], indexOf: ReadonlyMap<string, number>): (string | null)[] {
  const notes = emptyArray<string | null>(sessions.length, null);
  for (const segment of segments) {
    for (const p of segment.points) {
      const i = indexOf.get(p.session);
      if (i !== undefined && p.rules.length > 0) notes[i] = `Western Electric rule ${p.rules.join(', ')}`;
    }
  }
  return notes;
}
