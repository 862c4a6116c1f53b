/**
 * Text of a PDF written by Chromium's print (Skia), for tests: no PDF tool is installed here
 * (poppler's pdftotext is not on the machine and no PDF package is in node_modules). Handles what
 * Skia writes: Flate-compressed content streams, Type0 fonts with ToUnicode CMaps (bfchar and
 * bfrange), Tj and TJ operators with hex strings. Not a general PDF reader.
 */
import { inflateSync } from 'node:zlib';

interface PdfObject {
  dict: string;
  stream: Buffer | null;
}

function readObjects(pdf: Buffer): Map<number, PdfObject> {
  const text = pdf.toString('latin1');
  const objects = new Map<number, PdfObject>();
  const pattern = /(\d+) 0 obj\s*([\s\S]*?)endobj/g;
  for (let m = pattern.exec(text); m !== null; m = pattern.exec(text)) {
    const body = m[2];
    const streamAt = body.indexOf('stream');
    if (streamAt < 0 || !/>>\s*$/.test(body.slice(0, streamAt))) {
      objects.set(Number(m[1]), { dict: body, stream: null });
      continue;
    }
    const dict = body.slice(0, streamAt);
    let start = streamAt + 'stream'.length;
    if (body[start] === '\r') start += 1;
    if (body[start] === '\n') start += 1;
    const end = body.lastIndexOf('endstream');
    let raw = Buffer.from(body.slice(start, end), 'latin1');
    if (dict.includes('/FlateDecode')) {
      try {
        raw = inflateSync(raw);
      } catch {
        raw = Buffer.alloc(0);
      }
    }
    objects.set(Number(m[1]), { dict, stream: raw });
  }
  return objects;
}

function hexToBuffer(hex: string): Buffer {
  const clean = hex.replace(/\s+/g, '');
  return Buffer.from(clean.length % 2 === 1 ? `${clean}0` : clean, 'hex');
}

function utf16(hex: string): string {
  const bytes = hexToBuffer(hex);
  let out = '';
  for (let i = 0; i + 1 < bytes.length; i += 2) out += String.fromCharCode(bytes.readUInt16BE(i));
  return out;
}

/** CMap: glyph code (as hex string of the source width) → text. */
function parseCMap(source: string): { map: Map<number, string>; width: number } {
  const map = new Map<number, string>();
  let width = 2;
  const range = /begincodespacerange\s*<([0-9a-fA-F]+)>/.exec(source);
  if (range) width = range[1].length / 2;
  for (const block of source.matchAll(/beginbfchar([\s\S]*?)endbfchar/g)) {
    for (const m of block[1].matchAll(/<([0-9a-fA-F]+)>\s*<([0-9a-fA-F]*)>/g)) map.set(parseInt(m[1], 16), utf16(m[2]));
  }
  for (const block of source.matchAll(/beginbfrange([\s\S]*?)endbfrange/g)) {
    for (const m of block[1].matchAll(/<([0-9a-fA-F]+)>\s*<([0-9a-fA-F]+)>\s*(<[0-9a-fA-F]*>|\[[^\]]*\])/g)) {
      const lo = parseInt(m[1], 16);
      const hi = parseInt(m[2], 16);
      if (m[3].startsWith('[')) {
        const items = [...m[3].matchAll(/<([0-9a-fA-F]*)>/g)].map((x) => utf16(x[1]));
        items.forEach((t, i) => map.set(lo + i, t));
      } else {
        const base = hexToBuffer(m[3].slice(1, -1));
        for (let code = lo; code <= hi; code++) {
          const b = Buffer.from(base);
          b.writeUInt16BE((b.readUInt16BE(b.length - 2) + code - lo) & 0xffff, b.length - 2);
          map.set(code, utf16(b.toString('hex')));
        }
      }
    }
  }
  return { map, width };
}

function decodeString(hex: string, cmap: { map: Map<number, string>; width: number } | undefined): string {
  const bytes = hexToBuffer(hex);
  if (!cmap) return bytes.toString('latin1');
  let out = '';
  for (let i = 0; i + cmap.width <= bytes.length; i += cmap.width) {
    const code = cmap.width === 2 ? bytes.readUInt16BE(i) : bytes[i];
    out += cmap.map.get(code) ?? '';
  }
  return out;
}

/** The text of every page, in content-stream order; runs separated by spaces, text objects by newlines. */
export function pdfText(pdf: Buffer): string {
  const objects = readObjects(pdf);
  const cmapOfFont = new Map<number, { map: Map<number, string>; width: number }>();
  for (const [id, obj] of objects) {
    const ref = /\/ToUnicode\s+(\d+)\s+0\s+R/.exec(obj.dict);
    const stream = ref ? objects.get(Number(ref[1]))?.stream : null;
    if (stream) cmapOfFont.set(id, parseCMap(stream.toString('latin1')));
  }
  const fontByName = new Map<string, number>();
  for (const obj of objects.values()) {
    const fonts = /\/Font\s*<<([^>]*)>>/.exec(obj.dict);
    if (fonts) for (const m of fonts[1].matchAll(/\/([A-Za-z0-9_.-]+)\s+(\d+)\s+0\s+R/g)) fontByName.set(m[1], Number(m[2]));
  }
  const parts: string[] = [];
  for (const obj of objects.values()) {
    if (!obj.stream || obj.dict.includes('/Type /XObject') === false && !/\bTJ|\bTj/.test(obj.stream.toString('latin1', 0, Math.min(obj.stream.length, 1 << 20)))) continue;
    const content = obj.stream.toString('latin1');
    let cmap: { map: Map<number, string>; width: number } | undefined;
    const tokens = /\/([A-Za-z0-9_.-]+)\s+[\d.]+\s+Tf|<([0-9a-fA-F\s]*)>\s*Tj|\[((?:\s*(?:<[0-9a-fA-F\s]*>|-?[\d.]+)\s*)*)\]\s*TJ|\bET\b/g;
    for (let m = tokens.exec(content); m !== null; m = tokens.exec(content)) {
      if (m[1] !== undefined) cmap = cmapOfFont.get(fontByName.get(m[1]) ?? -1);
      else if (m[2] !== undefined) parts.push(decodeString(m[2], cmap), ' ');
      else if (m[3] !== undefined) {
        for (const piece of m[3].matchAll(/<([0-9a-fA-F\s]*)>|(-?[\d.]+)/g)) {
          if (piece[1] !== undefined) parts.push(decodeString(piece[1], cmap));
          else if (Number(piece[2]) < -200) parts.push(' ');
        }
        parts.push(' ');
      } else parts.push('\n');
    }
  }
  return parts.join('');
}
