/**
 * What an import has counted and found so far: counts, problems (the first MAX_LISTED_PROBLEMS
 * listed, all counted) and findings (a few per code listed). One tally travels through the
 * stages; each stage adds to it.
 */
import type { ImportCounts } from '../../domain/imports.js';
import type { InputFinding, InputProblem } from '../../domain/problems.js';
import { MAX_LISTED_PROBLEMS } from '../../domain/problems.js';

/** Findings of one kind listed in the report (the total is in the message). */
const MAX_LISTED_FINDINGS_PER_CODE = MAX_LISTED_PROBLEMS;

export interface ImportTally {
  counts: ImportCounts;
  errors: InputProblem[];
  totalErrors: number;
  /** Problems that quarantine cannot hold (whole-file, header, row shape, missing scales). */
  unquarantinableErrors: number;
  findings: InputFinding[];
  findingsPerCode: Map<string, number>;
}

export function emptyCounts(): ImportCounts {
  return { rows: 0, ratings: 0, missingCells: 0, sessions: 0, sessionsNew: 0, sessionsReplaced: 0, sessionsUnchanged: 0, valuesReplaced: 0, quarantined: 0 };
}

export function newTally(): ImportTally {
  return { counts: emptyCounts(), errors: [], totalErrors: 0, unquarantinableErrors: 0, findings: [], findingsPerCode: new Map() };
}

export function addProblem(tally: ImportTally, problem: InputProblem): void {
  tally.totalErrors += 1;
  if (tally.errors.length < MAX_LISTED_PROBLEMS) tally.errors.push(problem);
}

export function addFinding(tally: ImportTally, finding: InputFinding): void {
  const seen = (tally.findingsPerCode.get(finding.code) ?? 0) + 1;
  tally.findingsPerCode.set(finding.code, seen);
  if (seen <= MAX_LISTED_FINDINGS_PER_CODE) tally.findings.push(finding);
}

export const plural = (n: number, one: string, many = `${one}s`): string => `${n.toLocaleString('en-US')} ${n === 1 ? one : many}`;
