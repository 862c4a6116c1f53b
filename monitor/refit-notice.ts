/** What a page that depends on the refit says while one is due or running. */
import { localTime } from '../report/words.js';
import type { RefitState } from './panel-context.js';

export interface RefitNotice {
  isRunning: boolean;
  isStale: boolean;
  /** One sentence for the top of the page; null when the results are up to date and nothing runs. */
  text: string | null;
  flagsBuiltAt: string;
}

export function refitNotice(state: RefitState): RefitNotice {
  const isRunning = state.status === 'queued' || state.status === 'running';
  let text: string | null = null;
  if (isRunning) {
    const progress = state.nTasks > 0 ? ` (${state.nDone} of ${state.nTasks} steps done)` : '';
    text = `The analysis is being updated with the latest data${progress}. This page shows the previous results and reloads itself every 5 seconds.`;
  } else if (state.isStale) {
    text = 'The results are older than the data; an update of the analysis has been asked for.';
  } else if (state.status === 'failed') {
    text = `The last update of the analysis failed${state.message ? `: ${state.message}` : ''}. The results shown are from the update before.`;
  }
  return { isRunning, isStale: state.isStale, text, flagsBuiltAt: localTime(state.flagsBuiltAt) };
}
