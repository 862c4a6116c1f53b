import { SourceFailure } from './source-failure.js';

/** The text encodings read: UTF-8 (BOM optional) and UTF-16 with a byte-order mark. */
export type TextEncoding = 'utf-8' | 'utf-16le' | 'utf-16be';

interface ChunkDecoder {
  write(chunk: Uint8Array): string;
  end(): string;
}

function utf8Decoder(): ChunkDecoder {
  // fatal: invalid UTF-8 throws instead of turning into U+FFFD, so a file saved in a
  // legacy code page is refused rather than silently garbled. The BOM is dropped.
  const decoder = new TextDecoder('utf-8', { fatal: true, ignoreBOM: false });
  return {
    write: (chunk) => decoder.decode(chunk, { stream: true }),
    end: () => decoder.decode(),
  };
}

/** iconv-lite is loaded on the first UTF-16 file only: UTF-8 files (nearly all) skip its start-up cost. */
async function utf16Decoder(encoding: 'utf-16le' | 'utf-16be'): Promise<ChunkDecoder> {
  const iconv = (await import('iconv-lite')).default;
  const decoder = iconv.getDecoder(encoding, { stripBOM: true });
  return {
    write: (chunk) => decoder.write(Buffer.from(chunk.buffer, chunk.byteOffset, chunk.byteLength)),
    end: () => decoder.end() ?? '',
  };
}

function encodingFromBom(head: Uint8Array): 'utf-16le' | 'utf-16be' | null {
  if (head.length >= 2 && head[0] === 0xff && head[1] === 0xfe) return 'utf-16le';
  if (head.length >= 2 && head[0] === 0xfe && head[1] === 0xff) return 'utf-16be';
  return null;
}

/** UTF-16 without a BOM shows as many NUL bytes at odd (LE) or even (BE) offsets in ASCII text. */
function looksLikeBomlessUtf16(head: Uint8Array): boolean {
  const n = Math.min(head.length, 512);
  if (n < 4) return false;
  let zerosEven = 0;
  let zerosOdd = 0;
  for (let i = 0; i < n; i++) {
    if (head[i] === 0) {
      if (i % 2 === 0) zerosEven++;
      else zerosOdd++;
    }
  }
  const half = n / 2;
  return zerosOdd > half * 0.6 || zerosEven > half * 0.6;
}

function countNewlines(text: string, end = text.length): number {
  let count = 0;
  let at = text.indexOf('\n');
  while (at !== -1 && at < end) {
    count++;
    at = text.indexOf('\n', at + 1);
  }
  return count;
}

/**
 * Decode a byte stream to text chunks, choosing the encoding from the byte-order mark
 * (UTF-16 LE/BE) or else strict UTF-8. Throws SourceFailure('encoding' | 'file-unreadable')
 * with the (line-based) row where the fault is, for invalid UTF-8, BOM-less UTF-16 and
 * NUL bytes (binary content).
 */
export async function* decodeText(bytes: AsyncIterable<Uint8Array>): AsyncGenerator<string> {
  let decoder: ChunkDecoder | null = null;
  let pending: Uint8Array | null = null;
  let linesBefore = 0;

  const decodeChunk = function* (chunk: Uint8Array): Generator<string> {
    let text: string;
    try {
      text = decoder!.write(chunk);
    } catch {
      // Find where inside this chunk the bad bytes start, for the row number.
      const lenient = new TextDecoder('utf-8').decode(chunk);
      const bad = lenient.indexOf('\uFFFD');
      const row = linesBefore + countNewlines(lenient, bad === -1 ? lenient.length : bad) + 1;
      throw new SourceFailure(
        'encoding',
        `The file is not valid UTF-8 (first bad bytes in row ${row}). Save it as "CSV UTF-8" (or UTF-16 with a byte-order mark) and upload it again.`,
        row,
      );
    }
    const nul = text.indexOf('\u0000');
    if (nul !== -1) {
      const row = linesBefore + countNewlines(text, nul) + 1;
      throw new SourceFailure(
        'file-unreadable',
        `The file contains binary data (a NUL character in row ${row}); it is not a CSV text file. Upload a CSV or .xlsx file.`,
        row,
      );
    }
    linesBefore += countNewlines(text);
    if (text.length > 0) yield text;
  };

  for await (const raw of bytes) {
    let chunk = raw;
    if (decoder === null) {
      // Need at least 2 bytes to see a BOM; keep them until then.
      chunk = pending ? concat(pending, raw) : raw;
      if (chunk.length < 4) {
        pending = chunk;
        continue;
      }
      pending = null;
      const fromBom = encodingFromBom(chunk);
      if (fromBom) {
        decoder = await utf16Decoder(fromBom);
      } else if (looksLikeBomlessUtf16(chunk)) {
        throw new SourceFailure(
          'encoding',
          'The file looks like UTF-16 text without a byte-order mark, which cannot be read reliably. Save it as "CSV UTF-8" and upload it again.',
          1,
        );
      } else {
        decoder = utf8Decoder();
      }
    }
    yield* decodeChunk(chunk);
  }
  if (decoder === null) {
    if (!pending || pending.length === 0) return;
    const fromBom = encodingFromBom(pending);
    decoder = fromBom ? await utf16Decoder(fromBom) : utf8Decoder();
    yield* decodeChunk(pending);
  }
  let tail: string;
  try {
    tail = decoder.end();
  } catch {
    throw new SourceFailure(
      'encoding',
      `The file is not valid UTF-8 (it ends in the middle of a character, row ${linesBefore + 1}). Save it as "CSV UTF-8" and upload it again.`,
      linesBefore + 1,
    );
  }
  if (tail.length > 0) yield tail;
}

function concat(a: Uint8Array, b: Uint8Array): Uint8Array {
  const out = new Uint8Array(a.length + b.length);
  out.set(a, 0);
  out.set(b, a.length);
  return out;
}
