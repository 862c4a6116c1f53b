/**
 * Child of write-stdout.test.ts: writes an object through StdoutWriter and PrettyJsonObjectWriter
 * to the real standard output (the direct path: a pipe or a file), in batches of 3 elements.
 * Usage: node --import tsx write-stdout-child.ts JSON_FILE
 */
import { readFileSync } from 'node:fs';
import { PrettyJsonObjectWriter, StdoutWriter } from '../../server/cli/write-stdout.js';

const value = JSON.parse(readFileSync(process.argv[2], 'utf8')) as Record<string, unknown[]>;
const writer = new PrettyJsonObjectWriter(new StdoutWriter(process));
for (const [key, items] of Object.entries(value)) {
  writer.open(key);
  for (let at = 0; at < items.length; at += 3) writer.items(items.slice(at, at + 3));
  writer.close();
}
writer.end();
