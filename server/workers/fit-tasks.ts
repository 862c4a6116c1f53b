/**
 * The work a fit worker does, as plain functions (run in a piscina worker thread, or in-thread).
 * Pure analysis: observations in, results out; no database, no clock.
 */
import { buildFlags, createFlagsMemo, evaluateRetraining, validateThresholds } from '../../analysis/flags/index.js';
import { createChartSizingMemo } from '../../analysis/monitor/sizing-memo.js';
import { computeAssessorIndices } from '../../analysis/indices/compute-assessor-indices.js';
import { UNEXPECTED_FIT_FAILURE } from '../../analysis/analyze-ratings.js';
import { LmmFitError } from '../../analysis/lmm/errors.js';
import { fitPeriodModel } from '../../analysis/lmm/fit-period-model.js';
import { fitSessionModel } from '../../analysis/lmm/fit-session-model.js';
import { unpackRatings } from '../../store/fits-sessions.js';
import type {
  AttributeOutcome,
  FitFailure,
  FitTask,
  FitTaskResult,
  FlagsTask,
  FlagsTaskResult,
  PeriodTask,
  PeriodTaskResult,
  SessionTask,
  SessionTaskResult,
} from './fit-task-types.js';

/**
 * A fit that could not be made: a plain sentence for the pages, and for an unexpected error (a
 * fault of the program, not a data condition) its message and stack for the log. The worker has
 * no logger: the failure travels back with the result and the main thread logs it.
 */
function describeFailure(error: unknown): { problem: string; failure: FitFailure | null } {
  if (error instanceof LmmFitError) return { problem: `Could not be fitted: ${error.message}.`, failure: null };
  return {
    problem: `Could not be fitted: ${UNEXPECTED_FIT_FAILURE}.`,
    failure: error instanceof Error ? { message: error.message, stack: error.stack ?? null } : { message: String(error), stack: null },
  };
}

export function runSessionTask(task: SessionTask): SessionTaskResult {
  const findings: SessionTaskResult['findings'] = [];
  const attributes = task.attributes.map((a): AttributeOutcome => {
    let fit: AttributeOutcome['fit'] = null;
    let diagnostics: unknown = {};
    let problem: string | null = null;
    let failure: FitFailure | null = null;
    try {
      const result = fitSessionModel(a.observations);
      fit = result.json;
      // No diagnostics: the closed form answered (the refit does not run the optimiser to confirm it).
      diagnostics = { ...(result.diagnostics ?? { balancedFastPath: true }), withInteraction: result.withInteraction };
    } catch (error) {
      ({ problem, failure } = describeFailure(error));
      findings.push({
        code: error instanceof LmmFitError ? error.code : 'fit-failed',
        session: task.session,
        attribute: a.attribute,
        message: problem,
      });
    }
    // Indices do not need the model; the panel's product p (when fitted) gates the scaling test.
    const indices = computeAssessorIndices(a.observations, { panelProductPValue: fit?.productTest.p ?? null });
    return { attribute: a.attribute, fit, diagnostics, indices, problem, failure };
  });
  return { session: task.session, attributes, findings };
}

export function runPeriodTask(task: PeriodTask): PeriodTaskResult {
  try {
    const result = fitPeriodModel(task.observations, {
      startRelativeSds: task.startRelativeSds ?? undefined,
      startReducedRelativeSds: task.startReducedRelativeSds ?? undefined,
    });
    return {
      attribute: task.attribute,
      result: { json: result.json, diagnostics: result.diagnostics, lrt: result.productSessionLrt, reducedRelativeSds: result.reducedRelativeSds },
      problem: null,
      failure: null,
    };
  } catch (error) {
    return { attribute: task.attribute, result: null, ...describeFailure(error) };
  }
}

/**
 * Kept by this thread for its life (a worker runs the flags of every refit it is given): the
 * per-session checks of sessions that did not change are not repeated at the next refit, and the
 * chart sizings (limit widths, decision intervals, jump rules), which depend only on the chart
 * settings and baseline lengths, are found here by every build after the first. The analysis
 * functions themselves keep nothing.
 */
const FLAGS_MEMO = createFlagsMemo();
const SIZING_MEMO = createChartSizingMemo();

export function runFlagsTask(task: FlagsTask, memo = FLAGS_MEMO, sizingMemo = SIZING_MEMO): FlagsTaskResult {
  // Stored thresholds were validated when saved; validating again fills in defaults added since.
  const { thresholds } = validateThresholds(task.thresholds ?? {});
  const history = { ...task.history, ratings: unpackRatings(task.ratings) };
  return {
    flags: buildFlags(history, thresholds, { memo, sizingMemo }),
    retraining: task.retraining.map((r) => ({ id: r.id, evaluation: evaluateRetraining(history, r.assessor, r.eventSession, thresholds, { memo, sizingMemo }) })),
  };
}

export function runFitTask<T extends FitTask>(task: T): FitTaskResult<T> {
  switch (task.type) {
    case 'session':
      return runSessionTask(task) as FitTaskResult<T>;
    case 'period':
      return runPeriodTask(task) as FitTaskResult<T>;
    case 'flags':
      return runFlagsTask(task) as FitTaskResult<T>;
    default:
      throw new Error(`unknown fit task ${(task as { type: string }).type}`);
  }
}
