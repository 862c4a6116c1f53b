/**
 * What the monitor and the flag engine read about one panel: sessions in time order, stored
 * per-session results (fit and assessor indices), events, import findings, period fits and,
 * for the data-quality checks, ratings. Assembled from the store (store/panel-history.ts),
 * consumed by analysis/monitor, analysis/flags and the pages.
 */
import type { FitJson } from './analysis.js';
import type { AssessorSessionIndices } from './assessor-indices.js';
import type { InputFinding, ProblemCode } from './problems.js';
import type { Rating } from './ratings.js';

export interface SessionAttributeResult {
  session: string;
  date: string;
  attribute: string;
  scaleMin: number;
  scaleMax: number;
  fit: FitJson;
  indices: AssessorSessionIndices[];
  /** Panel product test p of this session and attribute (null when not defined). */
  productTestP: number | null;
}

export interface PanelEvent {
  id: number;
  kind: 'retraining' | 'control-batch' | 'note' | 'reference-period';
  /** Takes effect from this session (for a reference period: its first session). */
  session: string;
  /** Last session of a reference period (inclusive); null or absent for other kinds. */
  untilSession?: string | null;
  /** null: the whole panel. */
  assessor: string | null;
  note: string;
}

export interface PeriodFitSummary {
  attribute: string;
  sessions: string[];
  /** σ̂²_PS of the period model (a variance). */
  productSessionVariance: number;
  lrt: { likelihoodRatio: number; pValue: number } | null;
}

/** An import finding; quarantine problems ('out-of-scale', 'conflicting-duplicate') may be passed too. */
export type ImportFinding = Omit<InputFinding, 'code'> & { code: InputFinding['code'] | ProblemCode };

export interface PanelHistory {
  /** In time order. */
  sessions: { label: string; date: string }[];
  attributes: { name: string; scaleMin: number; scaleMax: number }[];
  referenceProducts: string[];
  results: SessionAttributeResult[];
  /** For the data-quality checks; may be limited to recent sessions. */
  ratings?: Rating[];
  importFindings: ImportFinding[];
  events: PanelEvent[];
  periodFits?: PeriodFitSummary[];
}
