/** Loading of the lme4/lmerTest reference fixtures written by test/fixtures/r/lmm.R. */
import { readFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import type { Observation } from '../../../domain/ratings.js';

export interface ExpectedFit {
  name: string;
  description?: string;
  attribute?: string;
  model: 'session' | 'period';
  terms: string[];
  reml: boolean;
  n: number;
  theta: Record<string, number>;
  sigma: number;
  variances: Record<string, number>;
  criterion: number;
  beta: number[];
  productTest?: { F: number; numDf: number; denDf: number; p: number };
  /** lmerTest's contrast rows for the product term (rows × fixed effects). */
  productContrast?: number[][];
  productMeans: { product: string; mean: number; se: number }[];
  assessorEffects: { assessor: string; blup: number; condSD: number }[];
  singular: boolean;
  lrt?: { term: string; likelihoodRatio: number };
  data?: { assessor: string[]; product: string[]; value: number[]; session?: string[] };
  cache?: string;
  rowsDropped?: number[];
}

const here = dirname(fileURLToPath(import.meta.url));
export const FIXTURE_DIR = join(here, '../../fixtures/json');
/** GPL (>= 2) test data of lmerTest, written by test/fixtures/r/lmm.R (see the folder's README). */
export const GPL_DATA_DIR = join(FIXTURE_DIR, 'gpl');

export function loadCases(name: string): ExpectedFit[] {
  return (JSON.parse(readFileSync(join(FIXTURE_DIR, name), 'utf8')) as { cases: ExpectedFit[] }).cases;
}

export function observationsFromData(data: NonNullable<ExpectedFit['data']>, attribute = 'value'): Observation[] {
  return data.value.map((value, i) => ({
    session: data.session ? data.session[i] : 'S1',
    assessor: data.assessor[i],
    product: data.product[i],
    replicate: 1,
    attribute,
    value,
  }));
}

/** Minimal reader of the data CSVs the R script writes (quoted strings, no embedded commas). */
export function readGplCsv(file: string): Record<string, string>[] {
  const path = join(GPL_DATA_DIR, file);
  const lines = readFileSync(path, 'utf8').trim().split(/\r?\n/);
  const header = lines[0].split(',').map((cell) => cell.replace(/^"|"$/g, ''));
  return lines.slice(1).map((line) => {
    const cells = line.split(',').map((cell) => cell.replace(/^"|"$/g, ''));
    return Object.fromEntries(header.map((name, index) => [name, cells[index]]));
  });
}
