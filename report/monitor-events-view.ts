/**
 * Panel events: retraining and new control batches restart chart baselines; a reference period
 * chooses which sessions a baseline is estimated from; notes only annotate.
 */
import { monitorCrumbs, monitorHref } from './monitor-common.js';
import type { PageViewBase } from './page-common.js';

type EventKind = 'retraining' | 'control-batch' | 'note' | 'reference-period';

export interface EventItem {
  id: number;
  kind: EventKind;
  kindLabel: string;
  session: string;
  /** Last session of a reference period; null for other kinds. */
  untilSession: string | null;
  /** "S05" or "S05 to S16". */
  sessionsText: string;
  assessor: string | null;
  note: string;
  createdAt: string;
  restartsBaseline: boolean;
  /** What the event does to the charts, in a few words. */
  effect: string;
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
  referencePeriodRule: string;
  /** Fewest sessions a reference period must span (the minimum baseline of the thresholds). */
  minReferenceSessions: number;
}

const KIND_LABELS: Record<EventKind, string> = {
  retraining: 'Retraining',
  'control-batch': 'New control batch',
  'reference-period': 'Reference period for baselines',
  note: 'Note',
};

const EFFECTS: Record<EventKind, string> = {
  retraining: 'baselines restart here',
  'control-batch': 'control-product baselines restart here',
  'reference-period': 'baselines estimated from these sessions',
  note: 'annotation only',
};

export function buildEventsView(input: {
  panel: string;
  events: readonly { id: number; kind: EventKind; session: string; untilSession: string | null; assessor: string | null; note: string; createdAt: string }[];
  sessions: readonly string[];
  assessors: readonly string[];
  minReferenceSessions: number;
}): EventsView {
  const base = monitorHref(input.panel, 'events');
  return {
    title: `Events: ${input.panel}`,
    breadcrumbs: monitorCrumbs(input.panel, 'Events'),
    panel: input.panel,
    events: input.events.map((e) => ({
      ...e,
      kindLabel: KIND_LABELS[e.kind],
      sessionsText: e.untilSession ? `${e.session} to ${e.untilSession}` : e.session,
      restartsBaseline: e.kind === 'retraining' || e.kind === 'control-batch',
      effect: EFFECTS[e.kind],
      deleteAction: `${base}/${e.id}/delete`,
    })),
    sessionOptions: [...input.sessions].reverse(),
    assessorOptions: [...input.assessors],
    kindOptions: Object.entries(KIND_LABELS).map(([value, label]) => ({ value, label })),
    addAction: base,
    minReferenceSessions: input.minReferenceSessions,
    explanation:
      'A retraining (of one assessor or everyone) or a new control batch restarts the chart baselines from the session it applies to, so the limits describe the new state; the flags are rebuilt. Notes only annotate the charts.',
    referencePeriodRule:
      `By default each chart's baseline is estimated from its first values after the latest restart. A reference period replaces that with the sessions you choose (at least ${input.minReferenceSessions}), for one assessor or the whole panel; an assessor's own period takes precedence over the panel's, and the latest recorded one applies. It sets the baseline of the chart segment (between restarts) that holds most of it; values before the period are shown but not monitored. Whole-panel periods also set the baselines of the product-effect charts.`,
  };
}
