/**
 * Small inline SVG charts for the reports, as plain shape lists the template draws
 * (templates/partials/small-chart.hbs). Greyscale-safe: series differ by pattern, dash and
 * marker shape, never by colour alone. Patterns are defined once per page (report-frame).
 */

export interface ChartRect { x: number; y: number; width: number; height: number; fill: string; stroke: string; title: string }
export interface ChartLine { x1: number; y1: number; x2: number; y2: number; stroke: string; strokeWidth: number; dash: string }
export interface ChartMark { d: string; fill: string; stroke: string; title: string }
export interface ChartText { x: number; y: number; anchor: 'start' | 'middle' | 'end'; size: number; text: string }

export interface SmallChart {
  width: number;
  height: number;
  title: string;
  description: string;
  rects: ChartRect[];
  lines: ChartLine[];
  marks: ChartMark[];
  texts: ChartText[];
}

/** Fill patterns (ids of report-frame's <defs>): solid dark, diagonal hatch, dots. */
export const PATTERN_FILLS = ['#3b3b3b', 'url(#ps-hatch)', 'url(#ps-dots)'] as const;

const r1 = (v: number) => Math.round(v * 10) / 10;

export function circlePath(cx: number, cy: number, r: number): string {
  return `M${r1(cx - r)},${r1(cy)}a${r},${r} 0 1,0 ${2 * r},0a${r},${r} 0 1,0 ${-2 * r},0Z`;
}

export function diamondPath(cx: number, cy: number, r: number): string {
  return `M${r1(cx)},${r1(cy - r)}L${r1(cx + r)},${r1(cy)}L${r1(cx)},${r1(cy + r)}L${r1(cx - r)},${r1(cy)}Z`;
}

export function squarePath(cx: number, cy: number, r: number): string {
  return `M${r1(cx - r)},${r1(cy - r)}h${2 * r}v${2 * r}h${-2 * r}Z`;
}

/** Round tick values covering [lo, hi] (about 5). */
export function niceTicks(lo: number, hi: number, count = 5): number[] {
  if (!(hi > lo)) return [lo];
  const raw = (hi - lo) / count;
  const magnitude = 10 ** Math.floor(Math.log10(raw));
  const step = [1, 2, 2.5, 5, 10].map((m) => m * magnitude).find((s) => s >= raw) ?? raw;
  const out: number[] = [];
  for (let v = Math.ceil(lo / step - 1e-9) * step; v <= hi + 1e-9; v += step) out.push(Math.round(v / step) * step);
  return out;
}

function tickLabel(v: number, step: number): string {
  // As many decimals as the step has (0.25 → 2, 0.5 → 1, 2 → 0).
  const decimals = Math.min(3, (String(Number(step.toPrecision(6))).split('.')[1] ?? '').length);
  return v.toFixed(decimals);
}

/** A 100 % bar split into parts (variance shares), with a legend under it. */
export function shareBar(parts: { label: string; share: number }[], title: string, description: string): SmallChart {
  const width = 360;
  const left = 4;
  const barWidth = width - 2 * left;
  const chart: SmallChart = { width, height: 30 + 16 * parts.length, title, description, rects: [], lines: [], marks: [], texts: [] };
  let x = left;
  parts.forEach((part, i) => {
    const w = Math.max(0, part.share) * barWidth;
    chart.rects.push({ x: r1(x), y: 4, width: r1(w), height: 18, fill: PATTERN_FILLS[i % PATTERN_FILLS.length], stroke: '#222222', title: `${part.label}: ${(part.share * 100).toFixed(0)} %` });
    x += w;
    const y = 30 + 16 * i;
    chart.rects.push({ x: left, y, width: 12, height: 12, fill: PATTERN_FILLS[i % PATTERN_FILLS.length], stroke: '#222222', title: part.label });
    chart.texts.push({ x: left + 18, y: y + 10, anchor: 'start', size: 11, text: `${part.label}: ${(part.share * 100).toFixed(0)} %` });
  });
  return chart;
}

export interface DotRow {
  label: string;
  value: number;
  /** Half-width of the bar drawn around the value (e.g. 1 SE); 0 for none. */
  halfWidth: number;
  shape: 'circle' | 'diamond';
  title: string;
}

/** One row per item: a marker at the value with a ±halfWidth bar; an x axis with round ticks. */
export function dotRows(rows: DotRow[], options: { title: string; description: string; axisLabel: string; domain?: [number, number] }): SmallChart {
  const labelWidth = 70;
  const width = 420;
  const right = width - 12;
  const rowHeight = 18;
  const top = 6;
  const height = top + rows.length * rowHeight + 30;
  const chart: SmallChart = { width, height, title: options.title, description: options.description, rects: [], lines: [], marks: [], texts: [] };
  if (rows.length === 0) return chart;
  let lo = options.domain?.[0] ?? Math.min(...rows.map((r) => r.value - r.halfWidth));
  let hi = options.domain?.[1] ?? Math.max(...rows.map((r) => r.value + r.halfWidth));
  if (!(hi > lo)) {
    lo -= 0.5;
    hi += 0.5;
  }
  const pad = (hi - lo) * 0.05;
  lo -= pad;
  hi += pad;
  const xOf = (v: number) => labelWidth + ((v - lo) / (hi - lo)) * (right - labelWidth);
  const ticks = niceTicks(lo, hi);
  const step = ticks.length > 1 ? ticks[1] - ticks[0] : 1;
  const bottom = top + rows.length * rowHeight;
  for (const t of ticks) {
    chart.lines.push({ x1: r1(xOf(t)), y1: top, x2: r1(xOf(t)), y2: bottom, stroke: '#dddddd', strokeWidth: 1, dash: '' });
    chart.texts.push({ x: r1(xOf(t)), y: bottom + 12, anchor: 'middle', size: 10, text: tickLabel(t, step) });
  }
  chart.texts.push({ x: r1((labelWidth + right) / 2), y: bottom + 26, anchor: 'middle', size: 10, text: options.axisLabel });
  rows.forEach((row, i) => {
    const y = top + i * rowHeight + rowHeight / 2;
    chart.texts.push({ x: labelWidth - 6, y: r1(y + 4), anchor: 'end', size: 11, text: row.label });
    if (row.halfWidth > 0) {
      chart.lines.push({ x1: r1(xOf(row.value - row.halfWidth)), y1: r1(y), x2: r1(xOf(row.value + row.halfWidth)), y2: r1(y), stroke: '#222222', strokeWidth: 1.5, dash: '' });
    }
    const x = xOf(row.value);
    chart.marks.push({ d: row.shape === 'diamond' ? diamondPath(x, y, 5) : circlePath(x, y, 4), fill: row.shape === 'diamond' ? '#ffffff' : '#222222', stroke: '#222222', title: row.title });
  });
  return chart;
}

export interface StripRow {
  label: string;
  /** Panel's middle half (25th–75th percentile of assessors), null when unknown. */
  bandLow: number | null;
  bandHigh: number | null;
  panelMedian: number | null;
  /** This assessor's value, null when not available. */
  own: number | null;
  title: string;
}

/**
 * One row per attribute: the panel's middle half as a hatched band, its median as a dashed line,
 * and one assessor's value as a filled circle. Only aggregates of the other assessors appear.
 */
export function stripRows(rows: StripRow[], options: { title: string; description: string; axisLabel: string; reference?: number }): SmallChart {
  const labelWidth = 132;
  const width = 440;
  const right = width - 12;
  const rowHeight = 16;
  const top = 4;
  const bottom = top + rows.length * rowHeight;
  const chart: SmallChart = { width, height: bottom + 28, title: options.title, description: options.description, rects: [], lines: [], marks: [], texts: [] };
  const values = rows.flatMap((r) => [r.bandLow, r.bandHigh, r.panelMedian, r.own]).filter((v): v is number => v !== null && Number.isFinite(v));
  if (options.reference !== undefined) values.push(options.reference);
  if (values.length === 0) return chart;
  let lo = Math.min(...values);
  let hi = Math.max(...values);
  if (!(hi > lo)) {
    lo -= 0.5;
    hi += 0.5;
  }
  const pad = (hi - lo) * 0.06;
  lo -= pad;
  hi += pad;
  const xOf = (v: number) => labelWidth + ((v - lo) / (hi - lo)) * (right - labelWidth);
  const ticks = niceTicks(lo, hi, 4);
  const step = ticks.length > 1 ? ticks[1] - ticks[0] : 1;
  for (const t of ticks) {
    chart.lines.push({ x1: r1(xOf(t)), y1: top, x2: r1(xOf(t)), y2: bottom, stroke: '#dddddd', strokeWidth: 1, dash: '' });
    chart.texts.push({ x: r1(xOf(t)), y: bottom + 12, anchor: 'middle', size: 10, text: tickLabel(t, step) });
  }
  if (options.reference !== undefined) {
    chart.lines.push({ x1: r1(xOf(options.reference)), y1: top, x2: r1(xOf(options.reference)), y2: bottom, stroke: '#777777', strokeWidth: 1, dash: '1 2' });
  }
  chart.texts.push({ x: r1((labelWidth + right) / 2), y: bottom + 25, anchor: 'middle', size: 10, text: options.axisLabel });
  rows.forEach((row, i) => {
    const y0 = top + i * rowHeight;
    const y = y0 + rowHeight / 2;
    chart.texts.push({ x: labelWidth - 6, y: r1(y + 4), anchor: 'end', size: 11, text: row.label });
    if (row.bandLow !== null && row.bandHigh !== null) {
      chart.rects.push({ x: r1(xOf(row.bandLow)), y: y0 + 3, width: r1(Math.max(1, xOf(row.bandHigh) - xOf(row.bandLow))), height: rowHeight - 6, fill: 'url(#ps-hatch)', stroke: '#888888', title: `Middle half of the panel: ${row.bandLow.toFixed(2)} to ${row.bandHigh.toFixed(2)}` });
    }
    if (row.panelMedian !== null) {
      chart.lines.push({ x1: r1(xOf(row.panelMedian)), y1: y0 + 1, x2: r1(xOf(row.panelMedian)), y2: y0 + rowHeight - 1, stroke: '#000000', strokeWidth: 2, dash: '3 2' });
    }
    if (row.own !== null) chart.marks.push({ d: circlePath(xOf(row.own), y, 4.5), fill: '#000000', stroke: '#ffffff', title: row.title });
  });
  return chart;
}

/** A line over sessions with square markers (e.g. reliability per session), y from 0 to 1. */
export function sessionLine(points: { label: string; value: number | null }[], options: { title: string; description: string; axisLabel: string; yDomain: [number, number] }): SmallChart {
  const left = 40;
  const width = 640;
  const right = width - 12;
  const top = 8;
  const bottom = 130;
  const chart: SmallChart = { width, height: bottom + 34, title: options.title, description: options.description, rects: [], lines: [], marks: [], texts: [] };
  const [lo, hi] = options.yDomain;
  const yOf = (v: number) => bottom - ((Math.min(hi, Math.max(lo, v)) - lo) / (hi - lo)) * (bottom - top);
  const xOf = (i: number) => (points.length <= 1 ? (left + right) / 2 : left + (i / (points.length - 1)) * (right - left));
  const ticks = niceTicks(lo, hi, 4);
  const step = ticks.length > 1 ? ticks[1] - ticks[0] : 1;
  for (const t of ticks) {
    chart.lines.push({ x1: left, y1: r1(yOf(t)), x2: right, y2: r1(yOf(t)), stroke: '#dddddd', strokeWidth: 1, dash: '' });
    chart.texts.push({ x: left - 4, y: r1(yOf(t) + 3), anchor: 'end', size: 10, text: tickLabel(t, step) });
  }
  const every = Math.max(1, Math.ceil(points.length / 12));
  points.forEach((p, i) => {
    if (i % every === 0 || i === points.length - 1) chart.texts.push({ x: r1(xOf(i)), y: bottom + 14, anchor: 'middle', size: 10, text: p.label });
  });
  chart.texts.push({ x: r1((left + right) / 2), y: bottom + 30, anchor: 'middle', size: 10, text: options.axisLabel });
  let previous: { x: number; y: number } | null = null;
  points.forEach((p, i) => {
    if (p.value === null) {
      previous = null;
      return;
    }
    const x = xOf(i);
    const y = yOf(p.value);
    if (previous) chart.lines.push({ x1: r1(previous.x), y1: r1(previous.y), x2: r1(x), y2: r1(y), stroke: '#222222', strokeWidth: 1.5, dash: '' });
    chart.marks.push({ d: squarePath(x, y, 3), fill: '#222222', stroke: '#222222', title: `${p.label}: ${p.value.toFixed(2)}` });
    previous = { x, y };
  });
  return chart;
}
