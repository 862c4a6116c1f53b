/**
 * The analyze command writes its JSON as it is made (server/cli/write-stdout.ts). The text must be
 * exactly `JSON.stringify(value, null, 2)` + newline, whatever the batches, empty arrays, escapes
 * and non-BMP characters, on the in-memory path (tests) and on the direct path (a pipe), where
 * the text is cut into pieces that must never split a surrogate pair.
 */
import { execFile } from 'node:child_process';
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { promisify } from 'node:util';
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { PrettyJsonObjectWriter, StdoutWriter } from '../../server/cli/write-stdout.js';

function written(value: Record<string, unknown[]>, batch: number): string {
  let text = '';
  const output = { stdout: { write: (chunk: string) => (text += chunk) }, stderr: { write: () => true } };
  const writer = new PrettyJsonObjectWriter(new StdoutWriter(output));
  for (const [key, items] of Object.entries(value)) {
    writer.open(key);
    for (let at = 0; at < items.length; at += batch) writer.items(items.slice(at, at + batch));
    writer.close();
  }
  writer.end();
  return text;
}

const element = fc.oneof(
  fc.record({ session: fc.string(), value: fc.double({ noNaN: true, noDefaultInfinity: true }), nested: fc.array(fc.record({ a: fc.integer(), b: fc.option(fc.string({ unit: 'binary' })) }), { maxLength: 3 }) }),
  fc.record({ text: fc.string({ unit: 'binary' }), list: fc.array(fc.integer(), { maxLength: 4 }) }),
);

describe('PrettyJsonObjectWriter', () => {
  it('writes exactly JSON.stringify(value, null, 2) for any batch size', () => {
    fc.assert(
      fc.property(fc.dictionary(fc.string({ minLength: 1, maxLength: 6 }), fc.array(element, { maxLength: 8 }), { minKeys: 0, maxKeys: 3 }), fc.integer({ min: 1, max: 5 }), (value, batch) => {
        expect(written(value, batch)).toBe(`${JSON.stringify(value, null, 2)}\n`);
      }),
    );
  });

  it('the direct path to a pipe: 3 MB with surrogate pairs at every offset, byte for byte', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'write-stdout-'));
    // Text elements of odd lengths with emoji (two UTF-16 units each), so pieces end at every offset.
    const texts = Array.from({ length: 300 }, (_, i) => `${'x'.repeat(i % 17)}${'😀é'.repeat(3000 + (i % 13))}`);
    const value = { fits: texts.map((text, i) => ({ i, text })), assessorIndices: [], notFitted: [{ reason: 'a "quoted"\nline' }] };
    const file = join(dir, 'value.json');
    writeFileSync(file, JSON.stringify(value));
    const { stdout } = await promisify(execFile)(process.execPath, ['--import', 'tsx', join(import.meta.dirname, 'write-stdout-child.ts'), file], {
      cwd: join(import.meta.dirname, '..', '..'),
      maxBuffer: 64 * 1024 * 1024,
      encoding: 'buffer',
    });
    expect(stdout.length).toBeGreaterThan(3_000_000);
    expect(Buffer.compare(stdout, Buffer.from(`${JSON.stringify(value, null, 2)}\n`, 'utf8'))).toBe(0);
  }, 60_000);
});
