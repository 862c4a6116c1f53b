/** Retraining of a panel: the cases that may call for it and the retraining recorded, with outcomes. */
import { buildRetrainingView, type RetrainingView } from '../report/monitor-flags-view.js';
import type { MonitorPanel } from './monitor-context.js';

export function buildRetrainingPage(ctx: MonitorPanel): RetrainingView {
  return buildRetrainingView({ panel: ctx.panel.name, records: ctx.read.flags(), retraining: ctx.read.retraining() });
}
