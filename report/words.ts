/**
 * Words and number formats the pages share: rating-centred labels for flag kinds (the JSON keeps
 * the kind codes), plain labels for thresholds (the code name as secondary text), one p-value
 * format, local times, plurals.
 */
import type { FlagKind, FlagSeverity } from '../domain/flags.js';

/** What a flag kind says about the ratings, in the words a panel leader uses. */
export const KIND_LABELS: Record<FlagKind, string> = {
  lenient: 'level above the panel',
  harsh: 'level below the panel',
  drift: 'level moving over time',
  inconsistent: 'wide replicate spread',
  'non-discriminating': 'weak product separation',
  disagreement: 'product order unlike the panel',
  reversed: 'product order reversed',
  'scale-compression': 'narrow use of the scale',
  'scale-expansion': 'wide use of the scale',
  'unstable-product': 'product not stable across sessions',
  'out-of-scale': 'value outside the scale',
  'decimal-shift': 'possible misplaced decimal point',
  duplicate: 'rating entered twice',
  'swapped-codes': 'possibly swapped sample codes',
  'missing-cells': 'missing ratings',
  'straight-lining': 'same rating for every product',
};

export function kindLabel(kind: FlagKind | string): string {
  return (KIND_LABELS as Record<string, string>)[kind] ?? kind;
}

export const SEVERITY_LABELS: Record<FlagSeverity, string> = { act: 'act', watch: 'watch' };

/** Plain labels for the thresholds (dotted paths of the settings object). */
export const THRESHOLD_LABELS: Record<string, string> = {
  fdrLevel: 'False discovery rate for act flags',
  recentSessions: 'Sessions pooled for assessor tests',
  minPooledSessions: 'Fewest sessions for a pooled test',
  'level.watchFraction': 'Level difference for watch (share of the scale)',
  'level.actFraction': 'Level difference for act (share of the scale)',
  'level.watchPValue': 'Level: p-value for watch',
  'repeatability.watchSdRatio': 'Replicate spread ratio for watch',
  'repeatability.actSdRatio': 'Replicate spread ratio for act',
  'repeatability.watchPValue': 'Replicate spread: p-value for watch',
  'discrimination.panelPValueMax': 'Product separation: panel must separate products below this p',
  'discrimination.watchPValue': 'Product separation: p-value for watch',
  'discrimination.actPValue': 'Product separation: p-value for act',
  'discrimination.shareOfSessions': 'Product separation: share of sessions',
  'agreement.minProducts': 'Product order: fewest products',
  'agreement.panelPValueMax': 'Product order: panel must separate products below this p',
  'agreement.watchR': 'Product order: correlation for watch',
  'agreement.watchDropFromPanel': 'Product order: drop below the panel median correlation',
  'agreement.reversedR': 'Product order reversed: correlation below',
  'scaling.panelPValueMax': 'Scale use: panel must separate products below this p',
  'scaling.watchLow': 'Scale use: narrow for watch (slope below)',
  'scaling.watchHigh': 'Scale use: wide for watch (slope above)',
  'scaling.actLow': 'Scale use: narrow for act (slope below)',
  'scaling.actHigh': 'Scale use: wide for act (slope above)',
  'charts.baselineSessions': 'Sessions in a full chart baseline',
  'charts.minBaselineSessions': 'Fewest sessions for a chart baseline',
  'charts.ewmaLambda': 'Smoothing weight of the moving-average chart',
  'charts.cusumK': 'Reference value of the cumulative-sum chart',
  'charts.sessionsPerYear': 'Sessions per year',
  'charts.actFalseAlarmsPerYear': 'Tolerated false act alarms per year',
  'charts.watchFalseAlarmsPerYear': 'Tolerated false watch alarms per year',
  'charts.jumpMinSd': 'Sudden shift: smallest jump, in the assessor\'s SDs',
  'charts.jumpAttributeShare': 'Sudden shift: on more than this share of attributes',
  'charts.westernElectricWatch': 'Pattern rules give watch flags',
  'productStability.lrtWatchPValue': 'Product stability: p-value for watch',
  'productStability.lrtActPValue': 'Product stability: p-value for act',
  'productStability.lrtWatchMinSdFraction': 'Product stability: smallest session-to-session spread for watch',
  'productStability.lrtActMinSdFraction': 'Product stability: smallest session-to-session spread for act',
  'productStability.minSessions': 'Product stability: fewest sessions',
  'productStability.stepFalseAlarmsPerYear': 'Product step: tolerated false act alarms per year',
  'productStability.stepWatchFalseAlarmsPerYear': 'Product step: tolerated false watch alarms per year',
  'quality.straightLiningWatchRatio': 'Same rating for every product: spread ratio for watch',
  'quality.straightLiningActShare': 'Same rating for every product: share of attributes for act',
  'quality.clippingZoneFraction': 'Scale ends: width of the end zone',
  'quality.clippingWatchFraction': 'Scale ends: share of ratings for watch',
  'quality.clippingWatchMultiple': 'Scale ends: multiple of the panel share for watch',
  'quality.clippingActFraction': 'Scale ends: share of ratings for act',
  'quality.missingWatchCompleteness': 'Missing ratings: completeness for watch',
  'quality.missingActCompleteness': 'Missing ratings: completeness for act',
  'quality.swapMinRelativeGain': 'Swapped codes: smallest relative gain',
  'quality.swapMinAttributes': 'Swapped codes: fewest attributes',
  'quality.swapFalseAlertsPerYear': 'Swapped codes: tolerated false alerts per year',
  'quality.decimalShiftMinRange': 'Misplaced decimal point: smallest scale range',
  'quality.decimalShiftRobustZ': 'Misplaced decimal point: robust z above',
  'retraining.minSessionsAfter': 'Retraining: sessions before judging it',
  'retraining.pValue': 'Retraining: p-value for an improvement',
};

export function thresholdLabel(path: string): string {
  return THRESHOLD_LABELS[path] ?? path;
}

/** A p-value alone, for a table cell: "0.003", "0.04", "0.50", "< 0.001". */
export function formatPValue(p: number | null | undefined): string {
  if (p === null || p === undefined || !Number.isFinite(p)) return '—';
  if (p < 0.001) return '< 0.001';
  if (p >= 0.1) return p.toFixed(2);
  return Number(p.toPrecision(1)) >= 0.01 ? p.toFixed(2) : p.toFixed(3);
}

/** The one p-value format of the pages: "p = 0.003", "p = 0.04", "p < 0.001". */
export function formatP(p: number | null | undefined, symbol = 'p'): string {
  const value = formatPValue(p);
  if (value === '—') return value;
  return value.startsWith('<') ? `${symbol} ${value}` : `${symbol} = ${value}`;
}

/** A number rounded for reading: 2 decimals below 10, 1 below 100, none above; never "-0". */
export function readable(value: number | null | undefined, decimals?: number): string {
  if (value === null || value === undefined || !Number.isFinite(value)) return '—';
  const d = decimals ?? (Math.abs(value) < 10 ? 2 : Math.abs(value) < 100 ? 1 : 0);
  const rounded = Number(value.toFixed(d));
  return (Object.is(rounded, -0) ? 0 : rounded).toFixed(d);
}

/** "1 session", "2 sessions". */
export function plural(n: number, one: string, many = `${one}s`): string {
  return `${n} ${n === 1 ? one : many}`;
}

// Made on first use: building an Intl formatter loads locale data (about 40 ms), which commands
// that never print a time (e.g. `flags`) should not pay at start-up.
let localTimeFormat: Intl.DateTimeFormat | undefined;

/** An instant in the server's local time zone: "4 Dec 2026, 15:40". */
export function localTime(iso: string | null | undefined): string {
  if (!iso) return '—';
  const date = new Date(iso);
  if (Number.isNaN(date.getTime())) return iso;
  localTimeFormat ??= new Intl.DateTimeFormat('en-GB', { day: 'numeric', month: 'short', year: 'numeric', hour: '2-digit', minute: '2-digit', hour12: false });
  return localTimeFormat.format(date);
}
