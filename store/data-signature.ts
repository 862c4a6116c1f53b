/**
 * The data signature the stored flags are built against: which sessions, at which data
 * version, under which analysis version. Kept apart from the refit so that commands that only
 * compare signatures (`flags` on an up-to-date store) do not load the refit and its worker pool.
 */
import { createHash } from 'node:crypto';

/** Recorded with every stored result; bump when a change in analysis/ changes stored numbers. */
export const ANALYSIS_VERSION = 'analysis-2';

/** What the whole panel's stored results depend on: every session label with its data version. */
export function panelDataSignature(sessions: readonly { label: string; dataVersion: number }[]): string {
  const text = `${ANALYSIS_VERSION}\n${sessions.map((s) => `${s.label}\t${s.dataVersion}`).join('\n')}`;
  return createHash('sha256').update(text).digest('hex').slice(0, 32);
}
