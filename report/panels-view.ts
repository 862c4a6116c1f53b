/** Home page: the panels in the store. */
import { HOME_CRUMB, panelHref, type PageViewBase } from './page-common.js';

import type { PanelSummary } from '../domain/imports.js';

export type PanelSummaryInput = PanelSummary;

export interface PanelListItem extends PanelSummaryInput {
  href: string;
  reviewHref: string;
}

export interface PanelsView extends PageViewBase {
  panels: PanelListItem[];
  nPanels: number;
}

export function buildPanelsView(panels: PanelSummaryInput[]): PanelsView {
  return {
    title: 'Panels',
    breadcrumbs: [{ ...HOME_CRUMB, href: null }],
    nPanels: panels.length,
    panels: panels.map((panel) => ({
      name: panel.name,
      href: panelHref(panel.name),
      // The panel's landing page is its weekly review; the sessions list stays one click away.
      reviewHref: `${panelHref(panel.name)}/monitor/review`,
      nSessions: panel.nSessions,
      nAssessors: panel.nAssessors,
      nProducts: panel.nProducts,
      nAttributes: panel.nAttributes,
      nRatings: panel.nRatings,
      nImports: panel.nImports,
      nQuarantineHeld: panel.nQuarantineHeld,
      firstSessionDate: panel.firstSessionDate,
      lastSessionDate: panel.lastSessionDate,
    })),
  };
}
