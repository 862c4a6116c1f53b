import type { InputProblem } from '../domain/problems.js';
import { restoreFormulaText } from './spreadsheet-safe.js';

/** The known columns; every other header is an attribute (wide form). */
export type ColumnRole = 'session' | 'date' | 'assessor' | 'product' | 'replicate' | 'attribute' | 'value' | 'code';

/** Accepted header names per role, compared after normaliseHeaderName (lower case, single spaces). */
export const HEADER_SYNONYMS: Readonly<Record<ColumnRole, readonly string[]>> = {
  session: ['session', 'session id', 'session label', 'session name'],
  date: ['date', 'session date'],
  assessor: ['assessor', 'panelist', 'panellist', 'judge', 'rater', 'subject', 'assessor code', 'assessor id', 'panelist code', 'panelist id', 'panellist code', 'panellist id'],
  product: ['product', 'sample', 'product code', 'product id', 'product name', 'sample id', 'sample name'],
  replicate: ['replicate', 'rep', 'repetition', 'replication'],
  attribute: ['attribute', 'descriptor'],
  value: ['value', 'score', 'rating', 'intensity'],
  code: ['code', 'sample code', 'blind code'],
};

const ROLE_BY_NAME = new Map<string, ColumnRole>();
for (const [role, names] of Object.entries(HEADER_SYNONYMS) as [ColumnRole, readonly string[]][]) {
  for (const name of names) ROLE_BY_NAME.set(name, role);
}

const KEY_ROLES = ['session', 'date', 'assessor', 'product', 'replicate'] as const;

/** Lower case, trimmed, with runs of spaces, underscores, hyphens and dots turned into one space. */
export function normaliseHeaderName(header: string): string {
  return header.trim().toLowerCase().replace(/[\s_.\-]+/g, ' ');
}

export interface ColumnLayout {
  form: 'long' | 'wide';
  /** Header text as written (trimmed, formula prefix removed), by 0-based column index. */
  headers: string[];
  /** 0-based column index of each known role present. */
  index: Partial<Record<ColumnRole, number>>;
  /** Wide form: the attribute columns (0-based index and attribute name = header). Empty in long form. */
  attributeColumns: { index: number; attribute: string }[];
  /** Columns with an empty header: cells there must stay empty. */
  unnamedColumns: number[];
}

type HeaderProblem = Omit<InputProblem, 'file'>;

function listFound(headers: string[]): string {
  const shown = headers.filter((h) => h !== '').slice(0, 20).map((h) => `"${truncateText(h, 40)}"`);
  const more = headers.length > 20 ? ` and ${headers.length - 20} more` : '';
  return shown.length > 0 ? `Columns found: ${shown.join(', ')}${more}.` : 'No column names were found.';
}

export function truncateText(text: string, max = 80): string {
  return text.length <= max ? text : text.slice(0, max - 1) + '…';
}

/**
 * Decide long or wide form from the header row and check it.
 * Long form when an attribute or value column is present (both are then required);
 * wide form otherwise, with one attribute per unknown header.
 */
export function resolveColumnLayout(rawHeaders: readonly string[], headerRow = 1, restoreFormulas = true): { layout: ColumnLayout | null; problems: HeaderProblem[] } {
  const headers = rawHeaders.map((h) => (restoreFormulas ? restoreFormulaText(h.trim()).trim() : h.trim()));
  const problems: HeaderProblem[] = [];
  const index: Partial<Record<ColumnRole, number>> = {};
  const others: number[] = [];
  const unnamedColumns: number[] = [];
  const firstByName = new Map<string, number>();

  headers.forEach((header, i) => {
    if (header === '') {
      unnamedColumns.push(i);
      return;
    }
    const normalised = normaliseHeaderName(header);
    const earlier = firstByName.get(normalised);
    if (earlier !== undefined) {
      problems.push({
        code: 'header-duplicate-column',
        row: headerRow,
        column: header,
        message: `Column "${truncateText(header, 60)}" appears twice (columns ${earlier + 1} and ${i + 1}); keep one of them.`,
        value: truncateText(header),
      });
      return;
    }
    firstByName.set(normalised, i);
    const role = ROLE_BY_NAME.get(normalised);
    if (role === undefined) {
      others.push(i);
    } else if (index[role] !== undefined) {
      const first = headers[index[role]!];
      problems.push({
        code: 'header-duplicate-column',
        row: headerRow,
        column: header,
        message: `Columns "${truncateText(first, 40)}" and "${truncateText(header, 40)}" both mean ${role}; keep one of them.`,
        value: truncateText(header),
      });
    } else {
      index[role] = i;
    }
  });

  const form: 'long' | 'wide' = index.attribute !== undefined || index.value !== undefined ? 'long' : 'wide';
  const required: ColumnRole[] = form === 'long' ? [...KEY_ROLES, 'attribute', 'value'] : [...KEY_ROLES];
  // A wide file whose attribute is called e.g. "intensity" reads as long form; say so.
  const longBecause = index.attribute === undefined && index.value !== undefined && others.length > 0 ? headers[index.value] : null;
  for (const role of required) {
    if (index[role] === undefined) {
      const synonyms = HEADER_SYNONYMS[role].filter((n) => n !== role).join(', ');
      const hint =
        role === 'attribute' && longBecause !== null
          ? ` Column "${truncateText(longBecause, 40)}" was taken as the value column of the long form; if it is an attribute of a wide-form file, rename it.`
          : '';
      problems.push({
        code: 'header-missing-column',
        row: headerRow,
        column: role,
        message: `The header row has no "${role}" column (also accepted: ${synonyms}). ${listFound(headers)}${hint}`,
        value: null,
      });
    }
  }
  if (form === 'long') {
    for (const i of others) {
      problems.push({
        code: 'header-unknown-column',
        row: headerRow,
        column: headers[i],
        message: `Column "${truncateText(headers[i], 60)}" is not one of session, date, assessor, product, replicate, attribute, value, code. In long form remove it; attributes go in the attribute column.`,
        value: truncateText(headers[i]),
      });
    }
  } else if (others.length === 0) {
    problems.push({
      code: 'header-missing-column',
      row: headerRow,
      column: 'attribute',
      message: `The file has neither attribute and value columns (long form) nor any attribute columns after the key columns (wide form). ${listFound(headers)}`,
      value: null,
    });
  }
  if (problems.length > 0) return { layout: null, problems };
  return {
    layout: {
      form,
      headers,
      index,
      attributeColumns: form === 'wide' ? others.map((i) => ({ index: i, attribute: headers[i] })) : [],
      unnamedColumns,
    },
    problems,
  };
}
