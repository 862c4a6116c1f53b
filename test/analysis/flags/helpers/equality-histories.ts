/**
 * Histories on which the flag engine's output is pinned (test/analysis/flags/same-flags.test.ts):
 * the synthetic year of bench/flags-bench.ts (52 sessions × 10 attributes × 12 assessors, 62 400
 * seeded ratings, planted lenient, drift, inconsistent and unstable-product faults, missing and
 * straight-lined cells), with and without a retraining event and a control-batch event.
 * The expected output was written by the engine before its speed work (commit 0ceeede) with
 * `npx tsx test/analysis/flags/helpers/write-expected-flags.ts OUT.json` in a checkout of that commit.
 */
import type { PanelHistory } from '../../../../analysis/monitor/series.js';
import { syntheticHistory } from './synthetic-history.js';
import { syntheticRatings } from './synthetic-ratings.js';

/** The synthetic year of bench/flags-bench.ts: indices with planted faults, plus seeded ratings. */
export function syntheticYear(nSessions = 52, ratingSeed = 9000): PanelHistory {
  const history = syntheticHistory({
    seed: 2026,
    nSessions,
    nAssessors: 12,
    nAttributes: 10,
    faults: [
      { kind: 'lenient', assessor: 'A03', size: 1.3 },
      { kind: 'drift', assessor: 'A07', fromSession: 26, size: 0.08 },
      { kind: 'inconsistent', assessor: 'A10' },
      { kind: 'unstable-product', product: 'T01', attributes: ['attr2'], fromSession: 26 },
    ],
  });
  history.ratings = history.sessions.flatMap((s, i) =>
    syntheticRatings({ seed: ratingSeed + i, session: s.label, date: s.date, nAssessors: 12, nAttributes: 10, products: ['REF', 'T01', 'T02', 'T03', 'T04'], nReplicates: 2 }),
  );
  return history;
}

export function equalityYear(nSessions = 52): PanelHistory {
  const history = syntheticYear(nSessions);
  // Data-quality faults for the per-session checks: a straight-lined block and missing cells.
  const straight = history.sessions[50].label;
  const gappy = history.sessions[40].label;
  history.ratings = history.ratings!
    .filter((r) => !(r.session === gappy && r.assessor === 'A05' && r.product !== 'REF'))
    .map((r) => (r.session === straight && r.assessor === 'A08' && (r.attribute === 'attr1' || r.attribute === 'attr2') ? { ...r, value: 5 } : r));
  return history;
}

/** The same year with a retraining of A07 at session 40 and a new control batch at session 30. */
export function equalityYearWithEvents(): PanelHistory {
  const history = equalityYear();
  history.events = [
    { id: 1, kind: 'retraining', session: history.sessions[40].label, assessor: 'A07', note: 'retrained' },
    { id: 2, kind: 'control-batch', session: history.sessions[30].label, assessor: null, note: 'new batch' },
  ];
  return history;
}
