/** Panel events: retraining and new control batches restart chart baselines; notes only annotate. */
import { monitorCrumbs, monitorHref } from './monitor-common.js';
import type { PageViewBase } from './page-common.js';

export interface EventItem {
  id: number;
  kind: 'retraining' | 'control-batch' | 'note';
  kindLabel: string;
  session: string;
  assessor: string | null;
  note: string;
  createdAt: string;
  restartsBaseline: boolean;
  deleteAction: string;
}

export interface EventsView extends PageViewBase {
  panel: string;
  events: EventItem[];
  sessionOptions: string[];
  assessorOptions: string[];
  kindOptions: { value: string; label: string }[];
  addAction: string;
  explanation: string;
}

const KIND_LABELS = { retraining: 'Retraining', 'control-batch': 'New control batch', note: 'Note' } as const;

export function buildEventsView(input: {
  panel: string;
  events: readonly { id: number; kind: 'retraining' | 'control-batch' | 'note'; session: string; assessor: string | null; note: string; createdAt: string }[];
  sessions: readonly string[];
  assessors: readonly string[];
}): EventsView {
  const base = monitorHref(input.panel, 'events');
  return {
    title: `Events: ${input.panel}`,
    breadcrumbs: monitorCrumbs(input.panel, 'Events'),
    panel: input.panel,
    events: input.events.map((e) => ({
      ...e,
      kindLabel: KIND_LABELS[e.kind],
      restartsBaseline: e.kind !== 'note',
      deleteAction: `${base}/${e.id}/delete`,
    })),
    sessionOptions: [...input.sessions].reverse(),
    assessorOptions: [...input.assessors],
    kindOptions: Object.entries(KIND_LABELS).map(([value, label]) => ({ value, label })),
    addAction: base,
    explanation:
      'A retraining (of one assessor or everyone) or a new control batch restarts the chart baselines from the session it applies to, so the limits describe the new state; the flags are rebuilt. Notes only annotate the charts.',
  };
}
