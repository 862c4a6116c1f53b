/** Pieces every page view shares: a title and the trail of links above it. */

export interface Breadcrumb {
  label: string;
  /** Link target; null for the current page (shown as plain text). */
  href: string | null;
}

/** What every page view carries besides its own data. */
export interface PageViewBase {
  /** Page title, also the `<h1>`. */
  title: string;
  breadcrumbs: Breadcrumb[];
}

/** Path segment for a panel or session name (names may hold spaces, slashes, anything). */
export function pathSegment(name: string): string {
  return encodeURIComponent(name);
}

export function panelHref(panel: string): string {
  return `/panels/${pathSegment(panel)}`;
}

export function sessionHref(panel: string, session: string): string {
  return `/panels/${pathSegment(panel)}/sessions/${pathSegment(session)}`;
}

export function importHref(importId: number): string {
  return `/imports/${importId}`;
}

export const HOME_CRUMB: Breadcrumb = { label: 'Panels', href: '/' };

/**
 * Share of the expected ratings that are present, in percent: stored ratings divided by
 * assessors × products × replicates × attributes seen in the session (a full design has every
 * assessor rate every product in every replicate on every attribute). Null when nothing is rated.
 */
export function completenessPercent(counts: {
  nRatings: number;
  nAssessors: number;
  nProducts: number;
  nReplicates: number;
  nAttributes: number;
}): number | null {
  const nExpected = counts.nAssessors * counts.nProducts * counts.nReplicates * counts.nAttributes;
  if (nExpected === 0) return null;
  return (100 * counts.nRatings) / nExpected;
}
