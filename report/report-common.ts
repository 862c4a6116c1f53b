/**
 * Pieces shared by the session report, the range report and the assessor feedback sheet: the
 * cautions printed on every page, the per-attribute model summary, the assessor × attribute
 * index tables with their open-case marks, and the findings list.
 */
import type { FitJson } from '../domain/analysis.js';
import type { AssessorSessionIndices } from '../analysis/indices/types.js';
import { dotRows, shareBar, type SmallChart } from './charts/small-charts.js';
import { counted, dfText, fixed, medianOf, pClause, pText, signed } from './report-format.js';
import { panelHref, pathSegment } from './page-common.js';

/** Printed on every page of every report (running footer in print). */
export const REPORT_CAUTIONS: readonly string[] = [
  'Flags are evidence for review, not judgements of people.',
  'Samples are small: one session gives each assessor a few ratings per attribute, so single numbers move by chance.',
  'The model assumes products are fixed, assessor and assessor-by-product effects are random and normal, and replicate errors are independent with equal spread.',
  'No flag is not proof of good performance: it only means no test crossed its threshold.',
];

/** Kinds that describe data entry, not how someone rates: never marked in the assessor tables. */
export const DATA_ENTRY_KINDS: ReadonlySet<string> = new Set(['out-of-scale', 'decimal-shift', 'duplicate', 'swapped-codes', 'missing-cells']);

export interface ReportAttributeScale {
  name: string;
  scaleMin: number | null;
  scaleMax: number | null;
}

/** One attribute of one session as stored by the last refit. */
export interface StoredAttributeInput {
  attribute: string;
  fit: FitJson | null;
  /** From analysis/reliability (computed by the caller, which may use analysis values). */
  reliability: { relativeCoefficient: number | null; absoluteCoefficient: number | null } | null;
  indices: AssessorSessionIndices[];
}

export interface ReportSessionInput {
  label: string;
  date: string;
  dataVersion: number;
  /** Data version of the stored results; null: never fitted. */
  fittedDataVersion: number | null;
  attributes: StoredAttributeInput[];
  fitNotes: { attribute?: string; message?: string; code?: string }[];
}

export interface OpenCaseInput {
  kind: string;
  assessor: string | null;
  product: string | null;
  attribute: string | null;
  severity: 'watch' | 'act';
  message: string;
}

export interface FindingInput {
  code: string;
  message: string;
  file?: string | null;
  row?: number | null;
  column?: string | null;
  session?: string | null;
  /** A cell held in quarantine (not stored until corrected), not only a note from the import. */
  isHeld: boolean;
}

export interface VarianceShare {
  key: 'assessor' | 'assessor:product' | 'residual';
  label: string;
  /** Variance (scale units squared). */
  variance: number;
  sd: number;
  sharePercent: number;
  shareText: string;
}

export interface ProductTestView {
  F: number | null;
  numDf: number;
  denDf: number | null;
  p: number | null;
  fText: string;
  dfText: string;
  pText: string;
  /** Fractional denominator df from Satterthwaite's approximation (the design was unbalanced). */
  isSatterthwaite: boolean;
  method: string;
}

export interface ProductMeanView {
  product: string;
  isReference: boolean;
  mean: number;
  se: number;
  meanText: string;
  seText: string;
}

export interface AttributeSummaryView {
  attribute: string;
  anchor: string;
  scaleText: string;
  isFitted: boolean;
  sentence: string;
  n: number;
  nAssessors: number;
  nProducts: number;
  isBalanced: boolean;
  productTest: ProductTestView | null;
  varianceShares: VarianceShare[];
  /** Without replicates the interaction cannot be told from replicate noise. */
  interactionNote: string | null;
  reliabilityRelative: number | null;
  reliabilityAbsolute: number | null;
  reliabilityText: string;
  productMeans: ProductMeanView[];
  sharesChart: SmallChart | null;
  meansChart: SmallChart | null;
}

export function attributeAnchor(attribute: string): string {
  return `attr-${attribute.toLowerCase().replace(/[^a-z0-9]+/g, '-')}`;
}

function scaleText(scale: ReportAttributeScale | undefined): string {
  if (!scale || scale.scaleMin === null || scale.scaleMax === null) return '';
  return `scale ${scale.scaleMin}–${scale.scaleMax}`;
}

/** Every assessor rated every product equally often (the F test's df are then exact). */
export function isBalancedFit(fit: FitJson, indices: readonly AssessorSessionIndices[]): boolean {
  const perCell = fit.n / (fit.assessors * fit.products);
  if (!Number.isInteger(perCell)) return false;
  return indices.length === fit.assessors && indices.every((row) => row.nProducts === fit.products && row.nRatings === fit.products * perCell);
}

export function varianceShares(fit: FitJson): VarianceShare[] {
  const parts: [VarianceShare['key'], string, number | null][] = [
    ['assessor', 'Assessors’ level differences', fit.variance.assessor],
    ['assessor:product', 'Assessor × product disagreement', fit.variance['assessor:product']],
    ['residual', fit.variance['assessor:product'] === null ? 'Replicate noise and disagreement (not separable without replicates)' : 'Replicate noise', fit.variance.residual],
  ];
  const present = parts.filter((p): p is [VarianceShare['key'], string, number] => p[2] !== null);
  const total = present.reduce((sum, [, , v]) => sum + Math.max(0, v), 0);
  return present.map(([key, label, variance]) => {
    const share = total > 0 ? (100 * Math.max(0, variance)) / total : 0;
    return { key, label, variance, sd: Math.sqrt(Math.max(0, variance)), sharePercent: share, shareText: `${share.toFixed(0)} %` };
  });
}

function separationSentence(test: ProductTestView | null): string {
  if (!test || test.p === null) return 'No product test could be made';
  if (test.p < 0.001) return `The panel separated the products clearly (${pClause(test.p)})`;
  if (test.p < 0.05) return `The panel separated the products (${pClause(test.p)})`;
  return `The panel did not separate the products beyond chance (${pClause(test.p)})`;
}

export function reliabilityText(value: number | null): string {
  if (value === null) return 'not available';
  const word = value >= 0.9 ? 'high' : value >= 0.7 ? 'moderate' : 'low';
  return `${fixed(value, 2)} (${word}; 1 = the panel would rank the products the same again)`;
}

export function buildAttributeSummary(
  input: StoredAttributeInput,
  scale: ReportAttributeScale | undefined,
  referenceProducts: ReadonlySet<string>,
  options: { withCharts: boolean } = { withCharts: true },
): AttributeSummaryView {
  const base = { attribute: input.attribute, anchor: attributeAnchor(input.attribute), scaleText: scaleText(scale) };
  const fit = input.fit;
  if (!fit) {
    return {
      ...base,
      isFitted: false,
      sentence: 'No model is stored for this attribute in this session (it could not be fitted, or the refit has not run yet).',
      n: 0,
      nAssessors: 0,
      nProducts: 0,
      isBalanced: false,
      productTest: null,
      varianceShares: [],
      interactionNote: null,
      reliabilityRelative: null,
      reliabilityAbsolute: null,
      reliabilityText: 'not available',
      productMeans: [],
      sharesChart: null,
      meansChart: null,
    };
  }
  const isBalanced = isBalancedFit(fit, input.indices);
  const t = fit.productTest;
  const isSatterthwaite = t.denDf !== null && Math.abs(t.denDf - Math.round(t.denDf)) > 1e-6;
  const productTest: ProductTestView = {
    F: t.F,
    numDf: t.numDf,
    denDf: t.denDf,
    p: t.p,
    fText: fixed(t.F, t.F !== null && t.F >= 100 ? 0 : 1),
    dfText: `${dfText(t.numDf)} and ${dfText(t.denDf)}`,
    pText: pText(t.p),
    isSatterthwaite: isSatterthwaite || !isBalanced,
    method: isSatterthwaite || !isBalanced ? 'F test with Satterthwaite’s denominator df (unbalanced session)' : 'F test (balanced session: exact df)',
  };
  const shares = varianceShares(fit);
  const relative = input.reliability?.relativeCoefficient ?? null;
  const shareWords = shares.map((s) => `${s.shareText} ${s.label.toLowerCase()}`).join(', ');
  const sentence = `${separationSentence(productTest)}. Of the spread that is not due to the products, ${shareWords}. Reliability of the product means: ${reliabilityText(relative)}.`;
  const productMeans = fit.productMeans.map((m) => ({
    product: m.product,
    isReference: referenceProducts.has(m.product),
    mean: m.mean,
    se: m.se,
    meanText: fixed(m.mean, 2),
    seText: fixed(m.se, 2),
  }));
  return {
    ...base,
    isFitted: true,
    sentence,
    n: fit.n,
    nAssessors: fit.assessors,
    nProducts: fit.products,
    isBalanced,
    productTest,
    varianceShares: shares,
    interactionNote: fit.variance['assessor:product'] === null ? 'No replicates in this session: disagreement about products cannot be told apart from replicate noise.' : null,
    reliabilityRelative: relative,
    reliabilityAbsolute: input.reliability?.absoluteCoefficient ?? null,
    reliabilityText: reliabilityText(relative),
    productMeans,
    sharesChart: !options.withCharts ? null : shareBar(
      shares.map((s) => ({ label: s.label.replace(/ \(.*\)$/, ''), share: s.sharePercent / 100 })),
      `${input.attribute}: variance shares`,
      shares.map((s) => `${s.label} ${s.shareText}`).join('; '),
    ),
    meansChart: !options.withCharts ? null : dotRows(
      productMeans.map((m) => ({
        label: m.product,
        value: m.mean,
        halfWidth: m.se,
        shape: m.isReference ? 'diamond' : 'circle',
        title: `${m.product}${m.isReference ? ' (reference)' : ''}: ${m.meanText} ± ${m.seText}`,
      })),
      {
        title: `${input.attribute}: product means`,
        description: productMeans.map((m) => `${m.product} ${m.meanText} (SE ${m.seText})`).join('; '),
        axisLabel: 'mean rating (scale points), bar = ±1 SE; diamond = reference product',
      },
    ),
  };
}

/** One assessor × attribute table of one index. */
export interface IndexTableView {
  key: 'level' | 'repeatability' | 'discrimination' | 'agreement';
  title: string;
  explanation: string;
  attributes: string[];
  rows: {
    assessor: string;
    /** Open cases about the assessor as a whole (no attribute); '' when none. */
    assessorCaseText: string;
    cells: { text: string; value: number | null; hasCase: boolean; caseText: string }[];
  }[];
}

/** Which index table shows a case of each kind. */
const INDEX_OF_KIND: Record<string, IndexTableView['key']> = {
  lenient: 'level',
  harsh: 'level',
  drift: 'level',
  inconsistent: 'repeatability',
  'non-discriminating': 'discrimination',
  'straight-lining': 'discrimination',
  'scale-compression': 'discrimination',
  disagreement: 'agreement',
  reversed: 'agreement',
  'scale-expansion': 'agreement',
};

const INDEX_DEFINITIONS: { key: IndexTableView['key']; title: string; explanation: string; value: (rows: AssessorSessionIndices[]) => number | null; text: (v: number | null) => string }[] = [
  {
    key: 'level',
    title: 'Level',
    explanation: 'Mean rating minus the panel mean for the same products, in scale points (+ rates higher than the panel).',
    value: (rows) => mean(rows.map((r) => r.offset)),
    text: (v) => signed(v, 2),
  },
  {
    key: 'repeatability',
    title: 'Repeatability',
    explanation: 'Spread between replicates of the same product relative to the rest of the panel (1 = like the panel; above 1 = less repeatable).',
    value: (rows) => mean(rows.map((r) => r.repeatabilitySdRatio)),
    text: (v) => fixed(v, 2),
  },
  {
    key: 'discrimination',
    title: 'Discrimination',
    explanation: 'F of the assessor’s own product comparison (about 1 = products not told apart; larger = clearer).',
    value: (rows) => medianOf(rows.map((r) => r.discriminationF)),
    text: (v) => fixed(v, 1),
  },
  {
    key: 'agreement',
    title: 'Agreement',
    explanation: 'Correlation of the assessor’s product means with the rest of the panel’s (1 = same ranking and spacing).',
    value: (rows) => mean(rows.map((r) => r.agreementR)),
    text: (v) => fixed(v, 2),
  },
];

function mean(values: (number | null)[]): number | null {
  const v = values.filter((x): x is number => x !== null && Number.isFinite(x));
  return v.length === 0 ? null : v.reduce((s, x) => s + x, 0) / v.length;
}

/**
 * Index tables from the indices of one or more sessions (several sessions: mean, or median for
 * F), with a mark where an open case about that assessor and attribute exists.
 */
export function buildIndexTables(sessions: readonly ReportSessionInput[], attributes: readonly string[], openCases: readonly OpenCaseInput[]): IndexTableView[] {
  const byCell = new Map<string, AssessorSessionIndices[]>();
  const assessors = new Set<string>();
  for (const s of sessions) {
    for (const a of s.attributes) {
      for (const row of a.indices) {
        assessors.add(row.assessor);
        const key = `${row.assessor}\u0000${a.attribute}`;
        (byCell.get(key) ?? byCell.set(key, []).get(key)!).push(row);
      }
    }
  }
  // A case is marked in the table of the index it is about; one about no attribute marks the assessor.
  const cases = new Map<string, string[]>();
  const rowCases = new Map<string, string[]>();
  for (const c of openCases) {
    if (c.assessor === null || DATA_ENTRY_KINDS.has(c.kind)) continue;
    const text = `${c.severity === 'act' ? 'Act' : 'Watch'}: ${c.message}`;
    const table = INDEX_OF_KIND[c.kind] ?? 'level';
    if (c.attribute === null) {
      const rowKey = `${table}\u0000${c.assessor}`;
      (rowCases.get(rowKey) ?? rowCases.set(rowKey, []).get(rowKey)!).push(text);
      continue;
    }
    const key = `${table}\u0000${c.assessor}\u0000${c.attribute}`;
    (cases.get(key) ?? cases.set(key, []).get(key)!).push(text);
  }
  const sortedAssessors = [...assessors].sort();
  return INDEX_DEFINITIONS.map((def) => ({
    key: def.key,
    title: def.title,
    explanation: def.explanation,
    attributes: [...attributes],
    rows: sortedAssessors.map((assessor) => ({
      assessor,
      assessorCaseText: (rowCases.get(`${def.key}\u0000${assessor}`) ?? []).join(' '),
      cells: attributes.map((attribute) => {
        const key = `${assessor}\u0000${attribute}`;
        const rows = byCell.get(key) ?? [];
        const value = rows.length === 0 ? null : def.value(rows);
        const caseMessages = cases.get(`${def.key}\u0000${key}`) ?? [];
        return { text: def.text(value), value, hasCase: caseMessages.length > 0, caseText: caseMessages.join(' ') };
      }),
    })),
  }));
}

export interface FindingView {
  label: string;
  message: string;
  where: string;
  isHeld: boolean;
}

const FINDING_LABELS: Record<string, string> = {
  'out-of-scale': 'value outside the scale',
  'decimal-shift': 'possible decimal slip',
  duplicate: 'repeated rating',
  'swapped-codes': 'possibly swapped sample codes',
  'missing-cells': 'missing ratings',
};

export function buildFindings(findings: readonly FindingInput[]): FindingView[] {
  return findings.map((f) => {
    const where = [f.file ?? null, f.row ? `row ${f.row}` : null, f.column ? `column ${f.column}` : null].filter((x) => x !== null).join(', ');
    return { label: FINDING_LABELS[f.code] ?? f.code.replace(/-/g, ' '), message: f.message, where, isHeld: f.isHeld };
  });
}

export function feedbackHref(panel: string, assessor: string, query: string): string {
  return `${panelHref(panel)}/assessors/${pathSegment(assessor)}/feedback${query}`;
}

export { counted };
