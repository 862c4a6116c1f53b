/**
 * Server-side control-chart geometry (d3-scale + d3-shape), rendered by
 * templates/partials/chart.hbs as inline SVG. Pure: numbers in, coordinates and path strings out.
 * Conventions: sessions on the x axis in time order (gaps where a value is missing), centre line
 * solid, limits dashed when provisional (baseline shorter than the full reference period),
 * signals drawn as filled marks with their severity, events (retraining, a new control batch)
 * as vertical marks labelled under the plot.
 */
import { scaleLinear, scalePoint } from 'd3-scale';
import { line } from 'd3-shape';

export type SignalSeverity = 'act' | 'watch';

export interface ChartSeriesInput {
  name: string;
  /** One value per session of `sessions` (null = not defined that session). */
  values: (number | null)[];
  /** Optional, aligned with values: a signal at that point. */
  signals?: (SignalSeverity | null)[];
  /** Optional, aligned with values: a short text shown on hover (the point's <title>). */
  notes?: (string | null)[];
  /** Optional, aligned with values: why a signal is drawn there (the case it belongs to, or why no case comes from it). */
  signalReasons?: (SignalReasonInput | null)[];
}

export interface SignalReasonInput {
  /** 'case' when the signal belongs to a case, else the reason code (chart-signals.ts). */
  code: string;
  /** The same in plain words for the page. */
  text: string;
}

export interface ChartLineInput {
  name: string;
  /** 'reference': what the values are compared with (e.g. the median of the other assessors). */
  kind: 'centre' | 'limit' | 'reference';
  /** A constant, or one value per session (null = not drawn there, e.g. before a baseline exists). */
  values: number | (number | null)[];
}

export interface ChartEventInput {
  session: string;
  label: string;
}

export interface ChartInput {
  title: string;
  /** What the y axis shows, with units ("z (SD units)", "offset, scale points"). */
  yLabel: string;
  sessions: string[];
  series: ChartSeriesInput[];
  lines: ChartLineInput[];
  /** Limits estimated from fewer reference values than wanted: drawn dashed, labelled provisional. */
  isProvisional: boolean;
  events: ChartEventInput[];
  /** One sentence for screen readers and the figure caption. */
  description: string;
  size?: 'full' | 'small';
}

export interface ChartPoint {
  cx: number;
  cy: number;
  session: string;
  value: number;
  isSignal: boolean;
  severity: SignalSeverity | null;
  /** For a signal: 'case' when it belongs to a case, else why no case comes from it (code); null otherwise. */
  signalReason: string | null;
  /** The same in plain words. */
  signalReasonText: string | null;
  title: string;
}

export interface ChartView {
  title: string;
  description: string;
  width: number;
  height: number;
  viewBox: string;
  isSmall: boolean;
  plot: { left: number; top: number; right: number; bottom: number; width: number; height: number };
  yLabel: string;
  yTicks: { y: number; label: string }[];
  xTicks: { x: number; label: string }[];
  series: { name: string; path: string; colour: string; points: ChartPoint[] }[];
  lines: { name: string; path: string; isDashed: boolean; colour: string; labelX: number; labelY: number; isReference: boolean }[];
  events: { x: number; top: number; bottom: number; label: string; labelY: number }[];
  isProvisional: boolean;
  nSignals: number;
  /** The marked points grouped by what they mean, in plain words (shown under the chart). */
  signalNotes: { text: string; nPoints: number }[];
  /** Plain-words legend of the lines other than the limits (e.g. the reference the values are compared with). */
  legend: { name: string; colour: string; isDashed: boolean; isReference: boolean }[];
  /** True when there is nothing to draw (no values). */
  isEmpty: boolean;
}

/** Colour-blind-safe pair plus greys (Okabe & Ito 2008 palette; common practice). */
const SERIES_COLOURS = ['#0072B2', '#D55E00', '#009E73', '#CC79A7'];
const CENTRE_COLOUR = '#555555';
const LIMIT_COLOUR = '#999999';
/** The reference line (e.g. the median of the other assessors): bluish green of the same palette, dashed. */
const REFERENCE_COLOUR = '#009E73';

function fixed(value: number): number {
  return Math.round(value * 100) / 100;
}

function lineValues(values: number | (number | null)[], n: number): (number | null)[] {
  return typeof values === 'number' ? Array.from({ length: n }, () => values) : values;
}

export function buildControlChart(input: ChartInput): ChartView {
  const isSmall = input.size === 'small';
  const width = isSmall ? 320 : 760;
  const height = isSmall ? 110 : 280;
  const margin = isSmall ? { top: 8, right: 8, bottom: 16, left: 34 } : { top: 16, right: 70, bottom: 56, left: 56 };
  const plot = {
    left: margin.left,
    top: margin.top,
    right: width - margin.right,
    bottom: height - margin.bottom,
    width: width - margin.left - margin.right,
    height: height - margin.top - margin.bottom,
  };
  const n = input.sessions.length;
  const allLines = input.lines.map((l) => ({ ...l, resolved: lineValues(l.values, n) }));
  const numbers: number[] = [];
  for (const s of input.series) for (const v of s.values) if (v !== null && Number.isFinite(v)) numbers.push(v);
  const isEmpty = numbers.length === 0;
  for (const l of allLines) for (const v of l.resolved) if (v !== null && Number.isFinite(v)) numbers.push(v);
  let low = numbers.length ? Math.min(...numbers) : -1;
  let high = numbers.length ? Math.max(...numbers) : 1;
  if (low === high) {
    low -= 1;
    high += 1;
  }
  const pad = (high - low) * 0.06;
  const y = scaleLinear()
    .domain([low - pad, high + pad])
    .range([plot.bottom, plot.top])
    .nice(isSmall ? 3 : 6);
  const x = scalePoint<string>().domain(input.sessions).range([plot.left, plot.right]).padding(0.5);
  const xOf = (session: string) => fixed(x(session) ?? plot.left);
  const path = line<[number, number | null]>()
    .defined((d) => d[1] !== null && Number.isFinite(d[1]))
    .x((d) => xOf(input.sessions[d[0]]))
    .y((d) => fixed(y(d[1] as number)));
  const pairs = (values: (number | null)[]) => values.map((v, i) => [i, v] as [number, number | null]);

  const series = input.series.map((s, index) => ({
    name: s.name,
    colour: SERIES_COLOURS[index % SERIES_COLOURS.length],
    path: path(pairs(s.values)) ?? '',
    points: s.values.flatMap((v, i): ChartPoint[] => {
      if (v === null || !Number.isFinite(v)) return [];
      const severity = s.signals?.[i] ?? null;
      const note = s.notes?.[i];
      const reason = severity === null ? null : (s.signalReasons?.[i] ?? null);
      return [
        {
          cx: xOf(input.sessions[i]),
          cy: fixed(y(v)),
          session: input.sessions[i],
          value: v,
          isSignal: severity !== null,
          severity,
          signalReason: reason?.code ?? null,
          signalReasonText: reason?.text ?? null,
          title: `${input.sessions[i]}: ${s.name} ${v.toFixed(2)}${severity ? ` (signal, ${severity})` : ''}${reason ? `; ${reason.text}` : ''}${note ? `; ${note}` : ''}`,
        },
      ];
    }),
  }));
  const lines = allLines.map((l) => {
    const lastIndex = l.resolved.map((v, i) => (v === null ? -1 : i)).reduce((a, b) => Math.max(a, b), -1);
    return {
      name: l.name,
      path: path(pairs(l.resolved)) ?? '',
      isDashed: (l.kind === 'limit' && input.isProvisional) || l.kind === 'reference',
      colour: l.kind === 'centre' ? CENTRE_COLOUR : l.kind === 'reference' ? REFERENCE_COLOUR : LIMIT_COLOUR,
      isReference: l.kind === 'reference',
      labelX: plot.right + 4,
      labelY: lastIndex >= 0 ? fixed(y(l.resolved[lastIndex] as number)) : plot.top,
    };
  });
  const tickEvery = Math.max(1, Math.ceil(n / (isSmall ? 4 : 13)));
  const xTicks = input.sessions.filter((_, i) => i % tickEvery === 0).map((s) => ({ x: xOf(s), label: s }));
  const yTicks = y.ticks(isSmall ? 3 : 6).map((t) => ({ y: fixed(y(t)), label: String(Number(t.toFixed(6))) }));
  const events = input.events
    .filter((e) => input.sessions.includes(e.session))
    .map((e, i) => ({ x: xOf(e.session), top: plot.top, bottom: plot.bottom, label: e.label, labelY: plot.bottom + 30 + (i % 2) * 12 }));
  return {
    title: input.title,
    description: input.description,
    width,
    height,
    viewBox: `0 0 ${width} ${height}`,
    isSmall,
    plot,
    yLabel: input.yLabel,
    yTicks,
    xTicks,
    series,
    lines: isSmall ? lines.map((l) => ({ ...l, labelX: -100 })) : lines,
    events,
    isProvisional: input.isProvisional,
    nSignals: series.reduce((sum, s) => sum + s.points.filter((p) => p.isSignal).length, 0),
    signalNotes: signalNotesOf(series.flatMap((s) => s.points)),
    legend: lines.filter((l) => l.isReference).map((l) => ({ name: l.name, colour: l.colour, isDashed: l.isDashed, isReference: l.isReference })),
    isEmpty,
  };
}

/** Signal points grouped by the words that explain them, in order of first appearance. */
function signalNotesOf(points: readonly ChartPoint[]): { text: string; nPoints: number }[] {
  const counts = new Map<string, number>();
  for (const p of points) if (p.isSignal && p.signalReasonText) counts.set(p.signalReasonText, (counts.get(p.signalReasonText) ?? 0) + 1);
  return [...counts].map(([text, nPoints]) => ({ text, nPoints }));
}
