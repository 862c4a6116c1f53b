/**
 * Standard output for long results (the analyze JSON, 3–4 MB for a year), written as it is made
 * through one reused 64 KB buffer. `process.stdout.write(text)` of the whole text would first hold
 * the text and then encode it into a new Buffer: fresh memory, the costly part on this machine
 * (bench/README.md, 2026-12-05). Direct writes only where Node itself writes standard output
 * synchronously (files and pipes on Linux), so the order of writes is the same; elsewhere, and
 * for the tests' in-memory output, the stream's write in pieces.
 */
import { writeSync } from 'node:fs';
import type { CommandOutput } from './import-command.js';

const BUFFER_BYTES = 1 << 16;
/** A piece of at most this many characters always fits the buffer (≤ 3 UTF-8 bytes per UTF-16 unit). */
const PIECE_CHARS = BUFFER_BYTES / 4;

export class StdoutWriter {
  private readonly direct: boolean;
  private readonly buffer: Buffer | null;
  private used = 0;
  private pending: string[] = [];
  private pendingChars = 0;
  /** The reader has gone (EPIPE): the rest is dropped quietly, as main.ts does. */
  private closed = false;

  constructor(private readonly output: CommandOutput) {
    const stdout = process.stdout as NodeJS.WriteStream & { _type?: string };
    this.direct = output === process && process.platform === 'linux' && (stdout._type === 'fs' || stdout._type === 'pipe') && stdout.writableLength === 0;
    this.buffer = this.direct ? Buffer.allocUnsafeSlow(BUFFER_BYTES) : null;
  }

  write(text: string): void {
    if (this.closed) return;
    if (!this.direct) {
      this.pending.push(text);
      this.pendingChars += text.length;
      if (this.pendingChars >= BUFFER_BYTES) this.flushPending();
      return;
    }
    for (let at = 0; at < text.length && !this.closed; ) {
      let end = Math.min(text.length, at + PIECE_CHARS);
      // Never split a surrogate pair between two pieces.
      const last = text.charCodeAt(end - 1);
      if (end < text.length && last >= 0xd800 && last <= 0xdbff) end--;
      if (this.used + 3 * (end - at) > BUFFER_BYTES) this.flush();
      this.used += this.buffer!.write(at === 0 && end === text.length ? text : text.substring(at, end), this.used, 'utf8');
      at = end;
    }
  }

  /** Writes out what is held; call once at the end. */
  end(): void {
    if (this.direct) this.flush();
    else this.flushPending();
  }

  private flushPending(): void {
    if (this.pending.length > 0) this.output.stdout.write(this.pending.join(''));
    this.pending = [];
    this.pendingChars = 0;
  }

  private flush(): void {
    for (let done = 0; done < this.used && !this.closed; ) {
      try {
        done += writeSync(1, this.buffer!, done, this.used - done);
      } catch (error) {
        const code = (error as NodeJS.ErrnoException).code;
        if (code === 'EPIPE') this.closed = true;
        // A non-blocking pipe that is full: wait a moment for the reader.
        else if (code === 'EAGAIN') Atomics.wait(new Int32Array(new SharedArrayBuffer(4)), 0, 0, 1);
        else throw error;
      }
    }
    this.used = 0;
  }
}

/** Depth-2 elements of `JSON.stringify(value, null, 2)`: the text of an array element of a top-level key. */
const WRAP_HEAD = '{\n  "x": [\n';
const WRAP_TAIL = '\n  ]\n}';

/**
 * Writes `{ "key": [ … ], … }` exactly as `JSON.stringify(object, null, 2)` would, with each
 * array's elements handed over in batches as they are made: `open(key)`, `items(batch)` any
 * number of times, `close()`, then `end()`. Elements are formatted by JSON.stringify itself
 * (inside a one-key wrapper whose first and last lines are cut), so numbers and escapes are the
 * same as the one-piece text.
 */
export class PrettyJsonObjectWriter {
  private keys = 0;
  private itemsInArray = 0;

  constructor(private readonly out: StdoutWriter) {
    out.write('{');
  }

  open(key: string): void {
    this.out.write(`${this.keys++ > 0 ? ',' : ''}\n  ${JSON.stringify(key)}: [`);
    this.itemsInArray = 0;
  }

  items(batch: readonly unknown[]): void {
    if (batch.length === 0) return;
    const text = JSON.stringify({ x: batch }, null, 2);
    this.out.write(this.itemsInArray === 0 ? '\n' : ',\n');
    this.out.write(text.slice(WRAP_HEAD.length, text.length - WRAP_TAIL.length));
    this.itemsInArray += batch.length;
  }

  close(): void {
    this.out.write(this.itemsInArray === 0 ? ']' : '\n  ]');
  }

  end(): void {
    this.out.write(this.keys === 0 ? '}\n' : '\n}\n');
    this.out.end();
  }
}
