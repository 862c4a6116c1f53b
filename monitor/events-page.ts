/** Events of a panel (retraining, control batches, notes, reference periods) and the form to add one. */
import { buildEventsView, type EventsView } from '../report/monitor-events-view.js';
import { PANEL_EVENT_KINDS, type PanelEventKind } from '../store/monitor-events.js';
import { InvalidInput, type MonitorPanel } from './monitor-context.js';

export function buildEventsPage(ctx: MonitorPanel): EventsView {
  return buildEventsView({
    panel: ctx.panel.name,
    events: ctx.read.events(),
    sessions: ctx.read.sessionLabels(),
    // From the store, not the fitted indices: events can be marked before the first refit.
    assessors: ctx.read.assessorCodes(),
    minReferenceSessions: ctx.thresholds.charts.minBaselineSessions,
  });
}

export interface EventForm {
  kind: string;
  session: string;
  until: string;
  assessor: string;
  note: string;
}

/** The event to record from the form, or InvalidInput saying what is wrong. */
export function eventFromForm(ctx: MonitorPanel, form: EventForm) {
  const kind = form.kind as PanelEventKind;
  const { session, until, assessor } = form;
  if (!PANEL_EVENT_KINDS.includes(kind)) throw new InvalidInput('the event must be retraining, control-batch, note or reference-period.');
  const labels = ctx.read.sessionLabels();
  const from = labels.indexOf(session);
  if (from < 0) throw new InvalidInput('choose a session of this panel.');
  let untilSession: string | null = null;
  if (kind === 'reference-period') {
    const to = labels.indexOf(until);
    if (to < 0) throw new InvalidInput('a reference period needs an "until" session of this panel.');
    if (to < from) throw new InvalidInput(`the reference period must end at or after ${session}.`);
    const minimum = ctx.thresholds.charts.minBaselineSessions;
    if (to - from + 1 < minimum) throw new InvalidInput(`a reference period must span at least ${minimum} sessions (the minimum baseline); ${session} to ${until} spans ${to - from + 1}.`);
    untilSession = until;
  }
  return { kind, session, untilSession, assessor: assessor === '' ? null : assessor, note: form.note };
}
