/**
 * The feedback sheet handed to one assessor: their level, repeatability, discrimination and
 * agreement per attribute against the panel's, and their ratings of the reference product.
 * The panel appears only as aggregates (median and middle half over assessors); no other
 * assessor's code or value is in this view, so neither the page nor its JSON twin can show one.
 */
import type { AssessorSessionIndices } from '../analysis/indices/types.js';
import { stripRows, type SmallChart, type StripRow } from './charts/small-charts.js';
import { HOME_CRUMB, panelHref } from './page-common.js';
import { REPORT_CAUTIONS, type ReportAttributeScale, type ReportSessionInput } from './report-common.js';
import { counted, fixed, localStamp, medianOf, quantileOf, signed } from './report-format.js';
import type { ReportHeader } from './session-report-view.js';

type MeasureKey = 'level' | 'repeatability' | 'discrimination' | 'agreement';

interface MeasureDefinition {
  key: MeasureKey;
  title: string;
  question: string;
  unit: string;
  /** One number per assessor and attribute from that assessor's indices over the sessions. */
  value: (rows: AssessorSessionIndices[]) => number | null;
  text: (v: number | null) => string;
  /** Words for "above the panel's middle half" and "below" (which direction is better is not implied). */
  above: string;
  below: string;
  within: string;
}

function meanOf(values: (number | null)[]): number | null {
  const v = values.filter((x): x is number => x !== null && Number.isFinite(x));
  return v.length === 0 ? null : v.reduce((s, x) => s + x, 0) / v.length;
}

const MEASURES: MeasureDefinition[] = [
  {
    key: 'level',
    title: 'Level',
    question: 'Do you rate higher or lower than the panel on the same samples?',
    unit: 'scale points above (+) or below (−) the panel mean',
    value: (rows) => meanOf(rows.map((r) => r.offset)),
    text: (v) => signed(v, 2),
    above: 'higher than most of the panel',
    below: 'lower than most of the panel',
    within: 'in line with most of the panel',
  },
  {
    key: 'repeatability',
    title: 'Repeatability',
    question: 'How close are your ratings when the same sample comes twice?',
    unit: 'typical difference between your replicates, scale points (SD)',
    value: (rows) => {
      const mse = meanOf(rows.map((r) => r.repeatabilityMSE));
      return mse === null ? null : Math.sqrt(Math.max(0, mse));
    },
    text: (v) => fixed(v, 2),
    above: 'wider apart than for most of the panel',
    below: 'closer together than for most of the panel',
    within: 'about as close as for most of the panel',
  },
  {
    key: 'discrimination',
    title: 'Discrimination',
    question: 'How clearly do you tell the products apart?',
    unit: 'F of your own product comparison (about 1 = not told apart)',
    value: (rows) => medianOf(rows.map((r) => r.discriminationF)),
    text: (v) => fixed(v, 1),
    above: 'more clearly than most of the panel',
    below: 'less clearly than most of the panel',
    within: 'about as clearly as most of the panel',
  },
  {
    key: 'agreement',
    title: 'Agreement',
    question: 'Do you rank and space the products like the rest of the panel?',
    unit: 'correlation with the rest of the panel (1 = same)',
    value: (rows) => meanOf(rows.map((r) => r.agreementR)),
    text: (v) => fixed(v, 2),
    above: 'closer to the panel than most assessors',
    below: 'further from the panel than most assessors',
    within: 'like most of the panel',
  },
];

export interface FeedbackRow {
  attribute: string;
  own: number | null;
  ownText: string;
  panelMedianText: string;
  panelBandText: string;
  words: string;
}

export interface FeedbackMeasureView {
  key: MeasureKey;
  title: string;
  question: string;
  unit: string;
  sentence: string;
  rows: FeedbackRow[];
  chart: SmallChart;
}

export interface ReferenceRow {
  attribute: string;
  product: string;
  ownMeanText: string;
  panelMeanText: string;
  differenceText: string;
  nOwn: number;
}

export interface AssessorFeedbackView extends ReportHeader {
  assessor: string;
  sessions: string[];
  intro: string;
  measures: FeedbackMeasureView[];
  reference: { sentence: string; rows: ReferenceRow[] };
  howToRead: string[];
}

export interface AssessorFeedbackInput {
  panel: string;
  assessor: string;
  sessions: ReportSessionInput[];
  attributes: ReportAttributeScale[];
  referenceProducts: string[];
  /** This assessor's ratings of the reference products in these sessions. */
  ownReferenceRatings: { session: string; attribute: string; product: string; value: number }[];
  generatedAt: Date;
  isStandaloneFile: boolean;
}

/** "In line with most of the panel on 7 of 10 attributes. Higher than most of the panel on 3: sweetness (+0.7), …" */
function measureSentence(known: readonly FeedbackRow[], within: string, title: string): string {
  if (known.length === 0) return `${title}: not available for these sessions (repeatability needs replicates).`;
  const groups = new Map<string, FeedbackRow[]>();
  for (const row of known) (groups.get(row.words) ?? groups.set(row.words, []).get(row.words)!).push(row);
  const capital = (text: string) => text.charAt(0).toUpperCase() + text.slice(1);
  const nWithin = groups.get(within)?.length ?? 0;
  const parts = nWithin === 0 ? [] : [`${capital(within)} on ${nWithin} of ${counted(known.length, 'attribute')}.`];
  for (const [words, rows] of groups) {
    if (words === within) continue;
    parts.push(`${capital(words)} on ${rows.length}${nWithin === 0 ? ` of ${counted(known.length, 'attribute')}` : ''}: ${rows.map((r) => `${r.attribute} (${r.ownText})`).join(', ')}.`);
  }
  return parts.join(' ');
}

export function buildAssessorFeedbackView(input: AssessorFeedbackInput): AssessorFeedbackView {
  const { assessor, sessions } = input;
  const attributeNames = [...new Set(sessions.flatMap((s) => s.attributes.map((a) => a.attribute)))].sort();
  // indices[attribute][assessor] over the sessions
  const byAttribute = new Map<string, Map<string, AssessorSessionIndices[]>>();
  for (const s of sessions) {
    for (const a of s.attributes) {
      const perAssessor = byAttribute.get(a.attribute) ?? byAttribute.set(a.attribute, new Map()).get(a.attribute)!;
      for (const row of a.indices) (perAssessor.get(row.assessor) ?? perAssessor.set(row.assessor, []).get(row.assessor)!).push(row);
    }
  }
  const measures = MEASURES.map((def): FeedbackMeasureView => {
    const rows: FeedbackRow[] = [];
    const strips: StripRow[] = [];
    for (const attribute of attributeNames) {
      const perAssessor = byAttribute.get(attribute) ?? new Map<string, AssessorSessionIndices[]>();
      const panelValues = [...perAssessor.values()].map((r) => def.value(r));
      const ownRows = perAssessor.get(assessor);
      const own = ownRows ? def.value(ownRows) : null;
      const low = quantileOf(panelValues, 0.25);
      const high = quantileOf(panelValues, 0.75);
      const median = medianOf(panelValues);
      const words = own === null || low === null || high === null ? 'not available' : own > high ? def.above : own < low ? def.below : def.within;
      rows.push({
        attribute,
        own,
        ownText: def.text(own),
        panelMedianText: def.text(median),
        panelBandText: low === null || high === null ? '—' : `${def.text(low)} to ${def.text(high)}`,
        words,
      });
      strips.push({ label: attribute, bandLow: low, bandHigh: high, panelMedian: median, own, title: `${attribute}: you ${def.text(own)}, panel median ${def.text(median)}` });
    }
    const known = rows.filter((r) => r.words !== 'not available');
    const off = known.filter((r) => r.words !== def.within);
    const sentence = measureSentence(known, def.within, def.title);
    return {
      key: def.key,
      title: def.title,
      question: def.question,
      unit: def.unit,
      sentence,
      rows,
      chart: stripRows(strips, {
        title: `${def.title}: you against the panel`,
        description: `Black dot: you; hatched band: middle half of the panel; dashed line: panel median. ${def.unit}.`,
        axisLabel: def.unit,
        reference: def.key === 'level' ? 0 : undefined,
      }),
    };
  });

  // Reference product: own mean rating against the panel's model mean, per attribute.
  const references = new Set(input.referenceProducts);
  const referenceRows: ReferenceRow[] = [];
  for (const attribute of attributeNames) {
    for (const product of [...references].sort()) {
      const own = input.ownReferenceRatings.filter((r) => r.attribute === attribute && r.product === product).map((r) => r.value);
      const panelMeans = sessions
        .flatMap((s) => s.attributes.filter((a) => a.attribute === attribute))
        .flatMap((a) => a.fit?.productMeans.filter((m) => m.product === product).map((m) => m.mean) ?? []);
      if (own.length === 0 && panelMeans.length === 0) continue;
      const ownMean = meanOf(own);
      const panelMean = meanOf(panelMeans);
      referenceRows.push({
        attribute,
        product,
        ownMeanText: fixed(ownMean, 2),
        panelMeanText: fixed(panelMean, 2),
        differenceText: ownMean === null || panelMean === null ? '—' : signed(ownMean - panelMean, 2),
        nOwn: own.length,
      });
    }
  }
  const referenceSentence =
    references.size === 0
      ? 'This panel has no reference product marked.'
      : referenceRows.length === 0
        ? `The reference product (${[...references].join(', ')}) was not served in these sessions.`
        : `Your mean rating of the reference product ${[...references].join(', ')} against the panel’s mean, per attribute.`;
  const period = sessions.length === 1 ? `Session ${sessions[0].label}, ${sessions[0].date}` : `Sessions ${sessions[0].label} (${sessions[0].date}) to ${sessions[sessions.length - 1].label} (${sessions[sessions.length - 1].date})`;
  return {
    title: `Feedback for assessor ${assessor}`,
    breadcrumbs: [HOME_CRUMB, { label: input.panel, href: panelHref(input.panel) }, { label: `Feedback ${assessor}`, href: null }],
    panel: input.panel,
    reportKind: 'session',
    period,
    generatedAt: localStamp(input.generatedAt),
    generatedAtIso: input.generatedAt.toISOString(),
    cautions: [...REPORT_CAUTIONS],
    isStandaloneFile: input.isStandaloneFile,
    fitNotice: null,
    assessor,
    sessions: sessions.map((s) => s.label),
    intro: `How your ratings in ${sessions.length === 1 ? `session ${sessions[0].label}` : `${counted(sessions.length, 'session')}`} compare with the panel's. The panel is shown only as a whole: its median and the middle half of its assessors.`,
    measures,
    reference: { sentence: referenceSentence, rows: referenceRows },
    howToRead: [
      'Black dot: you. Hatched band: the middle half of the panel’s assessors. Dashed line: the panel’s median.',
      'Outside the band is not a fault: one session gives only a few ratings per attribute. Talk it through with your panel leader.',
    ],
  };
}
