/**
 * The evidence of a flag as a small labelled table a panel leader can read: what was measured,
 * its value with unit and sensible rounding, the test, p, the threshold, n. Raw field names and
 * nested objects stay in the JSON twin.
 */
import { isDataEntryKind, type Flag } from '../domain/flags.js';
import { formatP, plural, readable } from './words.js';

export interface EvidenceRow {
  label: string;
  value: string;
}

function num(value: unknown): number | null {
  return typeof value === 'number' && Number.isFinite(value) ? value : null;
}

function signedPoints(value: number): string {
  return `${value > 0 ? '+' : value < 0 ? '−' : ''}${readable(Math.abs(value))} points`;
}

function interval(low: unknown, high: unknown, format: (v: number) => string): string {
  const a = num(low);
  const b = num(high);
  return a !== null && b !== null ? ` (95 % CI ${format(a)} to ${format(b)})` : '';
}

/** What was measured and its value, by kind (the first two rows of the table). */
function measured(flag: Flag): EvidenceRow {
  const e = flag.evidence;
  const times = (v: number) => `${readable(v)} ×`;
  switch (flag.kind) {
    case 'lenient':
    case 'harsh': {
      const v = num(e.meanOffset);
      return { label: 'Mean level difference from the rest of the panel', value: v === null ? '—' : `${signedPoints(v)}${interval(e.ciLow, e.ciHigh, signedPoints)}` };
    }
    case 'drift': {
      const v = num(e.recentShiftPoints) ?? num(e.meanRecentShiftPoints);
      const label = e.meanRecentShiftPoints !== undefined ? 'Shift of the level over the last sessions (average over attributes)' : 'Shift of the level over the last sessions';
      return { label, value: v === null ? '—' : signedPoints(v) };
    }
    case 'inconsistent': {
      const v = num(e.geometricMeanSdRatio);
      return { label: "Replicate spread as a multiple of the rest of the panel's", value: v === null ? '—' : `${times(v)}${interval(e.ciLow, e.ciHigh, times)}` };
    }
    case 'non-discriminating': {
      const v = num(e.shareNotDiscriminating);
      return { label: 'Share of sessions without product separation', value: v === null ? '—' : `${readable(v * 100, 0)} %` };
    }
    case 'disagreement':
    case 'reversed': {
      const v = num(e.pooledR);
      const panel = num(e.panelMedianR);
      return {
        label: 'Correlation of the product order with the rest of the panel',
        value: v === null ? '—' : `r = ${readable(v)}${panel !== null ? ` (panel median r = ${readable(panel)})` : interval(e.ciLow, e.ciHigh, (x) => readable(x))}`,
      };
    }
    case 'scale-compression':
    case 'scale-expansion': {
      const v = num(e.pooledScaling);
      return { label: "Spacing of the products as a multiple of the panel's", value: v === null ? '—' : `${times(v)}${interval(e.ciLow, e.ciHigh, times)}` };
    }
    case 'unstable-product': {
      const shift = num(e.recentShiftPoints);
      if (shift !== null) return { label: 'Shift of the product effect over the last sessions', value: signedPoints(shift) };
      const v = num(e.productSessionSdScaleFraction);
      return { label: 'Session-to-session spread of the product (share of the scale)', value: v === null ? '—' : `${readable(v * 100, 1)} %` };
    }
    default:
      return { label: 'Findings', value: plural(e.n, 'finding') };
  }
}

/** The field holding a kind's main number (a flag summarising several attributes carries its average as the statistic). */
const MAIN_FIELD: Partial<Record<Flag['kind'], string>> = {
  lenient: 'meanOffset',
  harsh: 'meanOffset',
  inconsistent: 'geometricMeanSdRatio',
  'non-discriminating': 'shareNotDiscriminating',
  disagreement: 'pooledR',
  reversed: 'pooledR',
  'scale-compression': 'pooledScaling',
  'scale-expansion': 'pooledScaling',
};

/** Whether the flag summarises the same finding on several attributes (its statistic is the average over them). */
function isSummaryOverAttributes(flag: Flag): boolean {
  return typeof flag.evidence.nAttributesFlagged === 'number';
}

/** The labelled rows of one flag's evidence. */
export function evidenceRows(flag: Flag): EvidenceRow[] {
  const summary = isSummaryOverAttributes(flag);
  const field = MAIN_FIELD[flag.kind];
  const e = summary && field ? { ...flag.evidence, [field]: flag.evidence.statistic } : flag.evidence;
  const rows: EvidenceRow[] = [];
  const first = measured({ ...flag, evidence: e });
  rows.push({ label: 'What was measured', value: summary ? `${first.label}, averaged over the attributes flagged` : first.label }, { label: 'Value', value: first.value });
  if (summary) rows.push({ label: 'Attributes flagged', value: `${e.nAttributesFlagged} of ${num(e.nAttributes) ?? '?'}` });
  const statistic = num(e.statistic);
  if (statistic !== null && !summary) {
    const df = num(e.df);
    rows.push({ label: 'Test statistic', value: `${readable(statistic)}${df !== null ? ` (${readable(df, df % 1 === 0 ? 0 : 1)} degrees of freedom)` : ''}` });
  }
  const smallest = summary ? ', smallest over the attributes' : '';
  if (num(e.pValue) !== null) rows.push({ label: `p-value${smallest}`, value: formatP(e.pValue) });
  if (num(e.qValue) !== null) rows.push({ label: `p-value adjusted for many tests (false discovery rate)${smallest}`, value: formatP(e.qValue, 'q') });
  if (typeof e.signalSession === 'string') rows.push({ label: 'Chart signalled at', value: `session ${e.signalSession}` });
  const limit = num(e.limit);
  if (limit !== null) rows.push({ label: 'Chart limit', value: readable(limit) });
  rows.push({ label: 'Threshold', value: e.threshold });
  rows.push({ label: 'n', value: isDataEntryKind(flag.kind) || flag.kind === 'straight-lining' ? plural(e.n, 'finding') : plural(e.n, 'session') });
  rows.push({ label: 'Test', value: e.test });
  const spreadsheetRows = Array.isArray(e.rows) ? (e.rows as unknown[]).filter((r): r is number => typeof r === 'number') : [];
  if (spreadsheetRows.length > 0) rows.push({ label: 'Spreadsheet rows', value: `${spreadsheetRows.slice(0, 12).join(', ')}${spreadsheetRows.length > 12 ? ', …' : ''}` });
  return rows;
}
