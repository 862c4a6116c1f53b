/**
 * The work a fit worker does, as plain functions (run in a piscina worker thread, or in-thread).
 * Pure analysis: observations in, results out; no database, no clock.
 */
import { buildFlags, evaluateRetraining, validateThresholds } from '../../analysis/flags/index.js';
import { computeAssessorIndices } from '../../analysis/indices/compute-assessor-indices.js';
import { LmmFitError } from '../../analysis/lmm/errors.js';
import { fitPeriodModel } from '../../analysis/lmm/fit-period-model.js';
import { fitSessionModel } from '../../analysis/lmm/fit-session-model.js';
import { unpackRatings } from '../../store/fits-sessions.js';
import type {
  AttributeOutcome,
  FitTask,
  FitTaskResult,
  FlagsTask,
  FlagsTaskResult,
  PeriodTask,
  PeriodTaskResult,
  SessionTask,
  SessionTaskResult,
} from './fit-task-types.js';

/** A plain sentence for a fit that could not be made; unexpected errors are not shown verbatim. */
function problemSentence(error: unknown): string {
  if (error instanceof LmmFitError) return `Not fitted: ${error.message}.`;
  return 'Not fitted: the model failed unexpectedly on these data.';
}

export function runSessionTask(task: SessionTask): SessionTaskResult {
  const findings: SessionTaskResult['findings'] = [];
  const attributes = task.attributes.map((a): AttributeOutcome => {
    let fit: AttributeOutcome['fit'] = null;
    let diagnostics: unknown = {};
    let problem: string | null = null;
    try {
      const result = fitSessionModel(a.observations);
      fit = result.json;
      // No diagnostics: the closed form answered (the refit does not run the optimiser to confirm it).
      diagnostics = { ...(result.diagnostics ?? { balancedFastPath: true }), withInteraction: result.withInteraction };
    } catch (error) {
      problem = problemSentence(error);
      findings.push({
        code: error instanceof LmmFitError ? error.code : 'fit-failed',
        session: task.session,
        attribute: a.attribute,
        message: problem,
      });
    }
    // Indices do not need the model; the panel's product p (when fitted) gates the scaling test.
    const indices = computeAssessorIndices(a.observations, { panelProductPValue: fit?.productTest.p ?? null });
    return { attribute: a.attribute, fit, diagnostics, indices, problem };
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
    };
  } catch (error) {
    return { attribute: task.attribute, result: null, problem: problemSentence(error) };
  }
}

export function runFlagsTask(task: FlagsTask): FlagsTaskResult {
  // Stored thresholds were validated when saved; validating again fills in defaults added since.
  const { thresholds } = validateThresholds(task.thresholds ?? {});
  const history = { ...task.history, ratings: unpackRatings(task.ratings) };
  return {
    flags: buildFlags(history, thresholds),
    retraining: task.retraining.map((r) => ({ id: r.id, evaluation: evaluateRetraining(history, r.assessor, r.eventSession, thresholds) })),
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
