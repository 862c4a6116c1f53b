/**
 * Long text (the analyze JSON, 3–4 MB for a year) to standard output through one reused 64 KB
 * buffer, instead of `process.stdout.write(text)`, which encodes the whole text into a new Buffer
 * first: about 20 ms of fresh memory on the benchmark year, a few per cent of the command.
 * Only where Node itself writes standard output synchronously (files and pipes on Linux), so the
 * order of writes is the same; elsewhere, and for the tests' in-memory output, the stream's write.
 */
import { writeSync } from 'node:fs';
import type { CommandOutput } from './import-command.js';

/** Characters per piece: at most 3 UTF-8 bytes each for text without surrogate pairs, 2 per char otherwise. */
const PIECE_CHARS = 1 << 14;
const BUFFER_BYTES = 1 << 16;

export function writeLongText(text: string, output: CommandOutput): void {
  const stdout = process.stdout as NodeJS.WriteStream & { _type?: string };
  const direct = output === process && process.platform === 'linux' && (stdout._type === 'fs' || stdout._type === 'pipe') && stdout.writableLength === 0;
  if (!direct) {
    output.stdout.write(text);
    return;
  }
  const buffer = Buffer.allocUnsafeSlow(BUFFER_BYTES);
  for (let at = 0; at < text.length; ) {
    let end = Math.min(text.length, at + PIECE_CHARS);
    // Never split a surrogate pair between two pieces.
    const last = text.charCodeAt(end - 1);
    if (end < text.length && last >= 0xd800 && last <= 0xdbff) end--;
    const length = buffer.write(text.substring(at, end), 0, 'utf8');
    if (!writeAll(buffer, length)) return;
    at = end;
  }
}

/** false when the reader has gone (EPIPE): like main.ts's handler, stop quietly. */
function writeAll(buffer: Buffer, length: number): boolean {
  for (let done = 0; done < length; ) {
    try {
      done += writeSync(1, buffer, done, length - done);
    } catch (error) {
      const code = (error as NodeJS.ErrnoException).code;
      if (code === 'EPIPE') return false;
      // A non-blocking pipe that is full: wait a moment for the reader.
      if (code === 'EAGAIN') Atomics.wait(new Int32Array(new SharedArrayBuffer(4)), 0, 0, 1);
      else throw error;
    }
  }
  return true;
}
