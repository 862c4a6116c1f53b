/**
 * Writes the flag engine's output on the pinned histories (equality-histories.ts) as JSON, to be
 * compared by same-flags.test.ts. Run in the checkout whose output is the reference:
 *   npx tsx test/analysis/flags/helpers/write-expected-flags.ts OUT.json
 */
import { writeFileSync } from 'node:fs';
import { buildFlags, DEFAULT_THRESHOLDS, evaluateRetraining } from '../../../../analysis/flags/index.js';
import { equalityYear, equalityYearWithEvents } from './equality-histories.js';

const year = equalityYear();
const withEvents = equalityYearWithEvents();
const expected = {
  year: buildFlags(year),
  yearWithoutRatings: buildFlags({ ...year, ratings: [] }),
  year51: buildFlags(equalityYear(51)),
  withEvents: buildFlags(withEvents),
  since: buildFlags(year, DEFAULT_THRESHOLDS, { since: year.sessions[45].label }),
  retraining: evaluateRetraining(withEvents, 'A07', withEvents.sessions[40].label, DEFAULT_THRESHOLDS),
};
writeFileSync(process.argv[2], `${JSON.stringify(expected)}\n`);
