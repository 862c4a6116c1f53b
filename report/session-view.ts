/**
 * One session's ratings, one table per attribute: a row per assessor, a column per product and
 * replicate, and the product means (arithmetic mean of the ratings present) under the table.
 */
import { completenessPercent, HOME_CRUMB, panelHref, sessionHref, type PageViewBase } from './page-common.js';
import type { AttributeScaleInput, SessionCountsInput } from './panel-view.js';

export interface RatingInput {
  attribute: string;
  assessor: string;
  product: string;
  replicate: number;
  value: number;
  code: string | null;
}

export interface ProductRoleInput {
  code: string;
  displayName: string | null;
  role: 'test' | 'reference';
}

export interface RatingColumn {
  product: string;
  replicate: number;
}

export interface AssessorRatingsRow {
  assessor: string;
  /** One value per column of `columns`; null where the rating is missing. */
  values: (number | null)[];
}

export interface ProductMean {
  product: string;
  /** Arithmetic mean over every assessor and replicate present. */
  mean: number;
  nRatings: number;
}

export interface AttributeRatingsTable {
  attribute: string;
  scaleMin: number | null;
  scaleMax: number | null;
  columns: RatingColumn[];
  rows: AssessorRatingsRow[];
  productMeans: ProductMean[];
  nRatings: number;
  /** Decimals the ratings are written with (at most 3): the table shows every value alike. */
  valueDigits: number;
}

export interface SessionView extends PageViewBase {
  panel: string;
  session: string;
  date: string;
  dataVersion: number;
  counts: { nAssessors: number; nProducts: number; nReplicates: number; nAttributes: number; nRatings: number };
  completenessPercent: number | null;
  products: ProductRoleInput[];
  attributes: AttributeRatingsTable[];
  csvHref: string;
  /** The session report: product tests, variance components, indices, what changed. */
  reportHref: string;
}

/** Decimals needed to show a value as recorded (1.25 → 2), capped at 3. */
function decimalsOf(value: number): number {
  for (let digits = 0; digits < 3; digits += 1) {
    if (Math.abs(Number(value.toFixed(digits)) - value) < 1e-9) return digits;
  }
  return 3;
}

function buildAttributeTable(attribute: string, ratings: RatingInput[], scale: AttributeScaleInput | undefined): AttributeRatingsTable {
  const columnKeys = new Map<string, RatingColumn>();
  const assessors = new Set<string>();
  const byCell = new Map<string, number>();
  const sums = new Map<string, { sum: number; n: number }>();
  for (const rating of ratings) {
    const columnKey = `${rating.product}\u0000${rating.replicate}`;
    if (!columnKeys.has(columnKey)) columnKeys.set(columnKey, { product: rating.product, replicate: rating.replicate });
    assessors.add(rating.assessor);
    byCell.set(`${rating.assessor}\u0000${columnKey}`, rating.value);
    const total = sums.get(rating.product) ?? { sum: 0, n: 0 };
    total.sum += rating.value;
    total.n += 1;
    sums.set(rating.product, total);
  }
  const columns = [...columnKeys.values()].sort((a, b) =>
    a.product === b.product ? a.replicate - b.replicate : a.product < b.product ? -1 : 1,
  );
  const rows = [...assessors].sort().map((assessor) => ({
    assessor,
    values: columns.map((column) => byCell.get(`${assessor}\u0000${column.product}\u0000${column.replicate}`) ?? null),
  }));
  const productMeans = [...sums.entries()]
    .sort(([a], [b]) => (a < b ? -1 : a > b ? 1 : 0))
    .map(([product, total]) => ({ product, mean: total.sum / total.n, nRatings: total.n }));
  return {
    attribute,
    scaleMin: scale?.scaleMin ?? null,
    scaleMax: scale?.scaleMax ?? null,
    columns,
    rows,
    productMeans,
    nRatings: ratings.length,
    valueDigits: ratings.reduce((digits, rating) => Math.max(digits, decimalsOf(rating.value)), 0),
  };
}

export function buildSessionView(input: {
  panel: string;
  summary: SessionCountsInput;
  ratings: RatingInput[];
  products: ProductRoleInput[];
  attributes: AttributeScaleInput[];
  csvHref: string;
}): SessionView {
  const ratingsByAttribute = new Map<string, RatingInput[]>();
  for (const rating of input.ratings) {
    const list = ratingsByAttribute.get(rating.attribute) ?? [];
    list.push(rating);
    ratingsByAttribute.set(rating.attribute, list);
  }
  const scales = new Map(input.attributes.map((attribute) => [attribute.name, attribute]));
  const { summary } = input;
  return {
    title: `Session ${summary.label}`,
    breadcrumbs: [HOME_CRUMB, { label: input.panel, href: panelHref(input.panel) }, { label: summary.label, href: null }],
    panel: input.panel,
    session: summary.label,
    date: summary.date,
    dataVersion: summary.dataVersion,
    counts: {
      nAssessors: summary.nAssessors,
      nProducts: summary.nProducts,
      nReplicates: summary.nReplicates,
      nAttributes: summary.nAttributes,
      nRatings: summary.nRatings,
    },
    completenessPercent: completenessPercent(summary),
    products: input.products.map((product) => ({ ...product })),
    attributes: [...ratingsByAttribute.entries()]
      .sort(([a], [b]) => (a < b ? -1 : a > b ? 1 : 0))
      .map(([attribute, ratings]) => buildAttributeTable(attribute, ratings, scales.get(attribute))),
    csvHref: input.csvHref,
    reportHref: `${sessionHref(input.panel, summary.label)}/report`,
  };
}
