/**
 * Every threshold the flag engine uses, in ONE settings object per panel, so that a panel's
 * thresholds can be read, changed, exported and restored as one JSON file.
 * The TypeBox schema is the documentation: each field's description says what it does and where
 * the value comes from (a source, or "common practice, no source" = CP). Methods notes §6.3 are
 * the starting point; adaptations are marked as ours. Used by the settings page and the JSON file.
 */
import { Type, type Static, type TSchema } from '@sinclair/typebox';
import { Value } from '@sinclair/typebox/value';

const probability = (description: string) => Type.Number({ exclusiveMinimum: 0, exclusiveMaximum: 1, description });
const positive = (description: string) => Type.Number({ exclusiveMinimum: 0, description });
const count = (minimum: number, description: string) => Type.Integer({ minimum, maximum: 1000, description });

export const PanelThresholdsSchema = Type.Object(
  {
    fdrLevel: probability('False discovery rate q of the Benjamini–Hochberg step-up within each family (one index × one evaluation × all assessor–attribute pairs). Source: Benjamini & Hochberg (1995); family definition methods §6.2; 0.05 is CP.'),
    recentSessions: count(3, 'Number of most recent sessions pooled for the per-index tests (lenient/harsh, inconsistent, non-discriminating, disagreement, reversed, scale use): one session is too noisy to act on. CP, no source.'),
    minPooledSessions: count(2, 'Fewest sessions with a defined index value before a pooled test is made. CP, no source.'),
    level: Type.Object({
      watchFraction: probability('Lenient/harsh watch: raw p < watchPValue and |pooled offset| ≥ this fraction of the scale range. Methods §6.3 (CP magnitude guard).'),
      actFraction: probability('Lenient/harsh act: BH q < fdrLevel and |pooled offset| ≥ this fraction of the scale range. Methods §6.3 (CP).'),
      watchPValue: probability('Raw p-value for watch-level index tests. Methods §6.3 (CP).'),
    }),
    repeatability: Type.Object({
      watchSdRatio: positive('Inconsistent watch: pooled s_a/s_(−a) above this and raw p < watchPValue (methods §6.3 uses "or"; ours requires both to keep clean panels quiet). CP.'),
      actSdRatio: positive('Inconsistent act: pooled s_a/s_(−a) above this and BH q < fdrLevel. Methods §6.3 (CP).'),
      watchPValue: probability('Raw one-sided p-value for the watch level. Methods §6.3 (CP).'),
    }),
    discrimination: Type.Object({
      panelPValueMax: probability('Sessions count for the non-discriminating test only when the panel product test p is below this. Methods §2.2 caution and §6.3 (CP).'),
      watchPValue: probability('An assessor session counts as "not discriminating" when its own product F test p exceeds this (watch). Methods §6.3 (CP).'),
      actPValue: probability('As watchPValue, for act. Methods §6.3 (CP).'),
      shareOfSessions: probability('Share of counted sessions that must be "not discriminating" (methods §6.3 uses ≥ 50 % of attributes in a session; ours pools sessions). CP.'),
    }),
    agreement: Type.Object({
      minProducts: count(3, 'Fewest products in a session for the agreement index to count. Methods §6.3 (P ≥ 5, CP).'),
      panelPValueMax: probability('Sessions count only when the panel product test p is below this. Methods §6.3 (CP).'),
      watchR: Type.Number({ minimum: -1, maximum: 1, description: 'Disagreement: pooled r below this (with the relative test raw p < level.watchPValue → watch, BH q < fdrLevel → act). Methods §6.3 (CP).' }),
      watchDropFromPanel: Type.Number({ minimum: 0, maximum: 2, description: 'Disagreement watch also when the pooled r is this much below the panel median r (relative test raw p < level.watchPValue). Ours, CP.' }),
      reversedR: Type.Number({ minimum: -1, maximum: 1, description: 'Reversed: pooled r below this and the test of mean atanh r < 0 significant (raw → watch, BH → act). Methods §6.3 (r < 0, CP).' }),
    }),
    scaling: Type.Object({
      panelPValueMax: probability('Scaling counts only when the panel product test p is below this. Methods §2.5 and §6.3 (CP).'),
      watchLow: positive('Scale-compression watch: pooled β below this and raw p < level.watchPValue. Methods §6.3 (CP).'),
      watchHigh: positive('Scale-expansion watch: pooled β above this and raw p < level.watchPValue. Methods §6.3 (CP).'),
      actLow: positive('Scale-compression act: pooled β below this and BH q < fdrLevel. Methods §6.3 (CP).'),
      actHigh: positive('Scale-expansion act: pooled β above this and BH q < fdrLevel. Methods §6.3 (CP).'),
    }),
    charts: Type.Object({
      baselineSessions: count(8, 'Reference values for final (not provisional) limits. Montgomery recommends about 20–25 Phase I samples [REC], methods §3.2.'),
      minBaselineSessions: count(2, 'Fewest reference values before any limits are drawn. Methods §3.2 (CP).'),
      ewmaLambda: Type.Number({ exclusiveMinimum: 0, maximum: 1, description: 'EWMA smoothing weight λ. Lucas & Saccucci (1990) table; methods §3.4 default 0.2.' }),
      cusumK: positive('CUSUM reference value k in σ units (0.5 is tuned to a 1σ shift). Page (1954); Montgomery; methods §3.5.'),
      sessionsPerYear: positive('Sessions per year used to turn a yearly false-alarm budget into a target ARL0. CP (weekly sessions).'),
      actFalseAlarmsPerYear: positive('Tolerated false act-level chart signals per year across a chart set (per-assessor summary charts; per-attribute charts each get this budget too). Chart limits are sized so that ARL0 = K × sessionsPerYear / budget (methods §3.4). Ours, from the issue goal ≤ 1 act flag per 10 clean assessor-years.'),
      watchFalseAlarmsPerYear: positive('As actFalseAlarmsPerYear for watch-level chart signals. CP.'),
      jumpMinSd: positive('Sudden shift: smallest one-session jump looked for, in the assessor\'s own session-to-session SDs, on more than jumpAttributeShare of the attributes in the same direction; raised automatically when needed to keep the false-alarm budget (actFalseAlarmsPerYear). Methods §3.10 (2 SDs: CP).'),
      jumpAttributeShare: Type.Number({ minimum: 0, exclusiveMaximum: 1, description: 'Sudden shift: the jump must show on more than this share of the evaluable attributes (0.5: most attributes). Methods §3.10 (CP).' }),
      westernElectricWatch: Type.Boolean({ description: 'Western Electric rules 2–4 on the per-assessor summary chart give watch flags. Western Electric (1956); mapping CP (methods §6.3).' }),
    }),
    productStability: Type.Object({
      lrtWatchPValue: probability('Period-model product:session boundary LRT p below this → watch. Methods §3.7a and §6.3 (CP levels on a published test).'),
      lrtActPValue: probability('Period-model LRT p below this → act. Methods §6.3 (CP).'),
      lrtWatchMinSdFraction: probability('Period-model flag needs a product:session SD of at least this fraction of the scale range for watch: with months of data the LRT detects batch-to-batch variation far too small to matter (a simulated clean panel with product:session SD 0.08 on a 0–10 scale gave p < 0.01 on 7 of 10 attributes). Ours, CP.'),
      lrtActMinSdFraction: probability('As lrtWatchMinSdFraction, for act. Ours, CP (5 % of the scale, the same size guard as drift and product steps).'),
      minSessions: count(3, 'Fewest sessions of a recurring product before its effect series is charted. CP.'),
      stepFalseAlarmsPerYear: positive('Tolerated false act-level step-change signals per year across all recurring product × attribute charts (sizes the EWMA limit). Ours, CP.'),
      stepWatchFalseAlarmsPerYear: positive('As stepFalseAlarmsPerYear, for watch-level step signals. Ours, CP.'),
    }),
    quality: Type.Object({
      straightLiningWatchRatio: probability('Straight-lining watch: SD over products of the assessor cell means / panel median < this. Methods §5.6 (CP).'),
      straightLiningActShare: probability('Straight-lining act for the session when the assessor has no variation at all on at least this share of attributes. Methods §5.6 (CP).'),
      clippingZoneFraction: probability('End zones [lo, lo + f·R] and [hi − f·R, hi]. Methods §5.7 (CP).'),
      clippingWatchFraction: probability('Clipping watch: share of the assessor ratings in the end zones ≥ this and ≥ clippingWatchMultiple × panel median share. Methods §5.7 (CP).'),
      clippingWatchMultiple: positive('See clippingWatchFraction. Methods §5.7 (CP).'),
      clippingActFraction: probability('Clipping act: share in the end zones ≥ this. Methods §5.7 (CP).'),
      missingWatchCompleteness: probability('Missing cells watch: assessor completeness below this. Methods §5.5 (CP).'),
      missingActCompleteness: probability('Missing cells act: assessor completeness below this. Methods §5.5 (CP).'),
      swapMinRelativeGain: probability('Swapped codes: relative distance gain ρ at least this (watch only, never act). Methods §5.10 (CP).'),
      swapMinAttributes: count(2, 'Swapped codes: attributes with spread needed. Methods §5.10 (CP).'),
      swapFalseAlertsPerYear: positive('Swapped codes: tolerated false swap alerts per panel-year; the served-versus-swapped tests share this budget (Bonferroni) over charts.sessionsPerYear sessions and, within a session, over the whole-session and replicate checks and over assessors × product pairs (the whole-session check by what a swap of each pair would show). methods §5.10 (ours; half the goal of ≤ 1 per 10 panel-years, leaving room for misfit of the model).'),
      decimalShiftMinRange: positive('In-range decimal shift is checked only for scales at least this wide. Methods §5.3b (CP).'),
      decimalShiftRobustZ: positive('In-range decimal shift: |v − median| > this × 1.4826 MAD. Iglewicz & Hoaglin (1993) modified z cut-off 3.5; methods §5.3b.'),
    }),
    retraining: Type.Object({
      minSessionsAfter: count(2, 'Sessions after a retraining event before before/after evidence is judged. CP.'),
      pValue: probability('One-sided Welch t test level for "improved". CP.'),
    }),
  },
  { additionalProperties: false },
);

export type PanelThresholds = Static<typeof PanelThresholdsSchema>;

export const DEFAULT_THRESHOLDS: PanelThresholds = {
  fdrLevel: 0.05,
  recentSessions: 8,
  minPooledSessions: 4,
  level: { watchFraction: 0.05, actFraction: 0.1, watchPValue: 0.05 },
  repeatability: { watchSdRatio: 1.5, actSdRatio: 2, watchPValue: 0.05 },
  discrimination: { panelPValueMax: 0.01, watchPValue: 0.05, actPValue: 0.2, shareOfSessions: 0.5 },
  agreement: { minProducts: 5, panelPValueMax: 0.01, watchR: 0.5, watchDropFromPanel: 0.2, reversedR: 0 },
  scaling: { panelPValueMax: 0.05, watchLow: 0.67, watchHigh: 1.5, actLow: 0.5, actHigh: 2 },
  charts: {
    baselineSessions: 20,
    minBaselineSessions: 8,
    ewmaLambda: 0.2,
    cusumK: 0.5,
    sessionsPerYear: 52,
    actFalseAlarmsPerYear: 0.05,
    watchFalseAlarmsPerYear: 1,
    jumpMinSd: 2,
    jumpAttributeShare: 0.5,
    westernElectricWatch: false,
  },
  productStability: { lrtWatchPValue: 0.05, lrtActPValue: 0.01, lrtWatchMinSdFraction: 0.02, lrtActMinSdFraction: 0.05, minSessions: 8, stepFalseAlarmsPerYear: 0.5, stepWatchFalseAlarmsPerYear: 1 },
  quality: {
    straightLiningWatchRatio: 0.2,
    straightLiningActShare: 0.5,
    clippingZoneFraction: 0.02,
    clippingWatchFraction: 0.25,
    clippingWatchMultiple: 2,
    clippingActFraction: 0.5,
    missingWatchCompleteness: 0.9,
    missingActCompleteness: 0.5,
    swapMinRelativeGain: 0.3,
    swapMinAttributes: 5,
    swapFalseAlertsPerYear: 0.05,
    decimalShiftMinRange: 50,
    decimalShiftRobustZ: 3.5,
  },
  retraining: { minSessionsAfter: 4, pValue: 0.05 },
};

export interface ThresholdProblem {
  /** JSON pointer-like path, e.g. "/level/actFraction". */
  path: string;
  message: string;
}

/**
 * Reads a thresholds JSON value (partial allowed: missing fields take the defaults). Returns the
 * merged thresholds, or the defaults with the list of problems when anything is invalid —
 * the caller decides whether to save. Cross-field rules (watch looser than act) are checked too.
 */
export function validateThresholds(json: unknown): { thresholds: PanelThresholds; problems: ThresholdProblem[] } {
  const problems: ThresholdProblem[] = [];
  if (json === null || typeof json !== 'object' || Array.isArray(json)) {
    return { thresholds: structuredClone(DEFAULT_THRESHOLDS), problems: [{ path: '', message: 'The thresholds must be a JSON object.' }] };
  }
  const merged = mergeDefaults(DEFAULT_THRESHOLDS, json as Record<string, unknown>);
  for (const error of Value.Errors(PanelThresholdsSchema, merged)) {
    problems.push({ path: error.path, message: plainMessage(error.path, error.message, error.schema) });
  }
  if (problems.length === 0) {
    const t = merged as PanelThresholds;
    const order = (path: string, ok: boolean, message: string) => {
      if (!ok) problems.push({ path, message });
    };
    order('/level/actFraction', t.level.actFraction >= t.level.watchFraction, 'The act offset must be at least the watch offset.');
    order('/repeatability/actSdRatio', t.repeatability.actSdRatio >= t.repeatability.watchSdRatio, 'The act SD ratio must be at least the watch SD ratio.');
    order('/scaling/actLow', t.scaling.actLow <= t.scaling.watchLow, 'The act lower scaling bound must not exceed the watch lower bound.');
    order('/scaling/actHigh', t.scaling.actHigh >= t.scaling.watchHigh, 'The act upper scaling bound must be at least the watch upper bound.');
    order('/scaling/watchHigh', t.scaling.watchHigh > 1 && t.scaling.watchLow < 1, 'The watch scaling bounds must enclose 1.');
    order('/charts/minBaselineSessions', t.charts.minBaselineSessions <= t.charts.baselineSessions, 'The minimum baseline must not exceed the full baseline.');
    order('/charts/actFalseAlarmsPerYear', t.charts.actFalseAlarmsPerYear <= t.charts.watchFalseAlarmsPerYear, 'Act limits must tolerate no more false alarms than watch limits.');
    order('/productStability/stepFalseAlarmsPerYear', t.productStability.stepFalseAlarmsPerYear <= t.productStability.stepWatchFalseAlarmsPerYear, 'Act limits must tolerate no more false alarms than watch limits.');
    order('/productStability/lrtActPValue', t.productStability.lrtActPValue <= t.productStability.lrtWatchPValue, 'The act p-value must not exceed the watch p-value.');
    order('/productStability/lrtActMinSdFraction', t.productStability.lrtActMinSdFraction >= t.productStability.lrtWatchMinSdFraction, 'The act size guard must not be smaller than the watch size guard.');
    order('/quality/missingActCompleteness', t.quality.missingActCompleteness <= t.quality.missingWatchCompleteness, 'The act completeness must not exceed the watch completeness.');
    order('/minPooledSessions', t.minPooledSessions <= t.recentSessions, 'The minimum pooled sessions must not exceed the recent-session window.');
  }
  if (problems.length > 0) return { thresholds: structuredClone(DEFAULT_THRESHOLDS), problems };
  return { thresholds: merged as PanelThresholds, problems };
}

function mergeDefaults(defaults: unknown, given: unknown): unknown {
  if (given === undefined) return structuredClone(defaults);
  if (defaults && typeof defaults === 'object' && !Array.isArray(defaults) && given && typeof given === 'object' && !Array.isArray(given)) {
    const result: Record<string, unknown> = {};
    const d = defaults as Record<string, unknown>;
    const g = given as Record<string, unknown>;
    for (const key of new Set([...Object.keys(d), ...Object.keys(g)])) result[key] = key in d ? mergeDefaults(d[key], g[key]) : g[key];
    return result;
  }
  return given;
}

function plainMessage(path: string, schemaMessage: string, schema: TSchema): string {
  const name = path.split('/').filter(Boolean).join('.') || 'thresholds';
  if (schemaMessage.toLowerCase().includes('unexpected property')) return `${name} is not a known threshold.`;
  const bounds: string[] = [];
  if (schema.exclusiveMinimum !== undefined) bounds.push(`above ${schema.exclusiveMinimum}`);
  if (schema.minimum !== undefined) bounds.push(`at least ${schema.minimum}`);
  if (schema.exclusiveMaximum !== undefined) bounds.push(`below ${schema.exclusiveMaximum}`);
  if (schema.maximum !== undefined) bounds.push(`at most ${schema.maximum}`);
  const kind = schema.type === 'integer' ? 'a whole number' : schema.type === 'boolean' ? 'true or false' : schema.type === 'object' ? 'a group of settings' : 'a number';
  return `${name} must be ${kind}${bounds.length ? ` ${bounds.join(' and ')}` : ''}.`;
}
