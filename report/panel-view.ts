/** One panel: its attributes and scales, and its sessions with counts and completeness. */
import { completenessPercent, HOME_CRUMB, sessionHref, type PageViewBase } from './page-common.js';
import type { PanelSummaryInput } from './panels-view.js';
import type { SessionCounts } from '../domain/imports.js';

export interface AttributeScaleInput {
  name: string;
  scaleMin: number;
  scaleMax: number;
  anchorLow: string | null;
  anchorHigh: string | null;
}

export type SessionCountsInput = SessionCounts;

export interface SessionListItem extends SessionCountsInput {
  href: string;
  /** Ratings present ÷ assessors × products × replicates × attributes, in percent; null when empty. */
  completenessPercent: number | null;
}

export interface PanelView extends PageViewBase {
  panel: string;
  summary: PanelSummaryInput;
  attributes: AttributeScaleInput[];
  sessions: SessionListItem[];
  importsHref: string;
}

export function buildPanelView(input: {
  summary: PanelSummaryInput;
  attributes: AttributeScaleInput[];
  sessions: SessionCountsInput[];
}): PanelView {
  const panel = input.summary.name;
  return {
    title: `Panel ${panel}`,
    breadcrumbs: [HOME_CRUMB, { label: panel, href: null }],
    panel,
    summary: { ...input.summary },
    attributes: input.attributes.map((attribute) => ({ ...attribute })),
    sessions: input.sessions.map((session) => ({
      ...session,
      href: sessionHref(panel, session.label),
      completenessPercent: completenessPercent(session),
    })),
    importsHref: `/imports?panel=${encodeURIComponent(panel)}`,
  };
}
