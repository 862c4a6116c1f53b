/** The list of flag cases of a panel, filtered by kind, severity and status. */
import { buildFlagsListView, parseFlagFilter, type FlagsListView } from '../report/monitor-flags-view.js';
import type { MonitorPanel } from './monitor-context.js';

export function buildFlagsPage(ctx: MonitorPanel, params: { query: Record<string, string> }): FlagsListView {
  return buildFlagsListView({ panel: ctx.panel.name, records: ctx.read.flags(), filter: parseFlagFilter(params.query) });
}
