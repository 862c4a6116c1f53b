/** CSV twins of the report tables: raw numbers at full precision, text made spreadsheet-safe. */
import { stringify } from 'csv-stringify/sync';
import { neutralizeFormulaText } from '../../ingest/spreadsheet-safe.js';
import type { IndexTableView } from '../../report/report-common.js';
import type { RangeReportView, SessionReportView } from '../../report/session-report-view.js';

type Cell = string | number | boolean | null;

function cell(value: Cell): string {
  if (value === null) return '';
  if (typeof value === 'boolean') return value ? 'yes' : 'no';
  return typeof value === 'number' ? String(value) : neutralizeFormulaText(value);
}

export function toCsv(columns: string[], rows: Cell[][]): string {
  return stringify(
    rows.map((row) => row.map(cell)),
    { header: true, columns, record_delimiter: '\r\n' },
  );
}

export type ReportTable = 'attributes' | 'means' | 'indices';

export function reportTable(value: unknown): ReportTable {
  return value === 'means' || value === 'indices' ? value : 'attributes';
}

/** Long form of the assessor × attribute tables: one row per assessor and attribute. */
export function indicesCsv(tables: readonly IndexTableView[]): string {
  const [first] = tables;
  const rows: Cell[][] = [];
  if (first) {
    first.rows.forEach((row, r) =>
      first.attributes.forEach((attribute, a) => {
        rows.push([row.assessor, attribute, ...tables.map((t) => t.rows[r].cells[a].value), tables.some((t) => t.rows[r].cells[a].hasCase)]);
      }),
    );
  }
  return toCsv(['assessor', 'attribute', ...tables.map((t) => t.key), 'openCase'], rows);
}

const ATTRIBUTE_COLUMNS = ['attribute', 'F', 'numDf', 'denDf', 'p', 'satterthwaite', 'varianceAssessor', 'varianceAssessorProduct', 'varianceResidual', 'shareAssessorPercent', 'shareAssessorProductPercent', 'shareResidualPercent', 'reliability'];

function attributeRow(a: SessionReportView['attributes'][number]): Cell[] {
  const share = (key: string) => a.varianceShares.find((s) => s.key === key) ?? null;
  return [
    a.attribute,
    a.productTest?.F ?? null,
    a.productTest?.numDf ?? null,
    a.productTest?.denDf ?? null,
    a.productTest?.p ?? null,
    a.productTest?.isSatterthwaite ?? null,
    share('assessor')?.variance ?? null,
    share('assessor:product')?.variance ?? null,
    share('residual')?.variance ?? null,
    share('assessor')?.sharePercent ?? null,
    share('assessor:product')?.sharePercent ?? null,
    share('residual')?.sharePercent ?? null,
    a.reliabilityRelative,
  ];
}

export function sessionReportCsv(view: SessionReportView, table: ReportTable): string {
  if (table === 'indices') return indicesCsv(view.indexTables);
  if (table === 'means') {
    return toCsv(
      ['attribute', 'product', 'reference', 'mean', 'se'],
      view.attributes.flatMap((a) => a.productMeans.map((m) => [a.attribute, m.product, m.isReference, m.mean, m.se])),
    );
  }
  return toCsv(ATTRIBUTE_COLUMNS, view.attributes.map(attributeRow));
}

export function rangeReportCsv(view: RangeReportView, table: ReportTable): string {
  if (table === 'indices') return indicesCsv(view.indexTables);
  return toCsv(
    ['attribute', 'session', 'date', 'F', 'df', 'p', 'satterthwaite', 'shareAssessor', 'shareAssessorProduct', 'shareResidual', 'reliability'],
    view.attributes.flatMap((a) => a.rows.map((r) => [a.attribute, r.session, r.date, r.fText, r.dfText, r.pText, r.isSatterthwaite, ...r.shares, r.reliabilityText])),
  );
}
