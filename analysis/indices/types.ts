/** The per-assessor index rows are shared by analysis, store and pages: defined in domain/. */
export type { AssessorSessionIndices, IndexReason } from '../../domain/assessor-indices.js';
