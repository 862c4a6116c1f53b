/** Piscina worker entry: runs one fit task (pure analysis, no database) and returns its result. */
import { runFitTask } from './fit-tasks.js';
import type { FitTask } from './fit-task-types.js';

export default function fitWorker(task: FitTask): unknown {
  return runFitTask(task);
}
