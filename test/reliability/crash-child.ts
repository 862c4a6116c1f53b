/**
 * Child process of crash.test.ts: imports one file into one store and exits. Prints "ready"
 * once the modules are loaded (the parent's kill clock starts there), "writing" when the write
 * transaction begins, "committed" after it, and "done <outcome>" at the end.
 * Usage: node --import tsx crash-child.ts STORE FILE
 */
import { basename } from 'node:path';
import { fileInput, importRatings } from '../../store/import-ratings.js';
import { openStore } from '../../store/open-store.js';

const [storePath, filePath] = process.argv.slice(2);
const db = openStore(storePath);
process.stdout.write('ready\n');
const report = await importRatings(db, {
  panel: 'crash',
  fileName: basename(filePath),
  source: 'cli',
  input: fileInput(filePath),
  scale: { min: 0, max: 10 },
  quarantine: false,
  onPhase: (phase) => process.stdout.write(`${phase}\n`),
});
db.close();
process.stdout.write(`done ${report.outcome} ${report.counts.ratings}\n`);
