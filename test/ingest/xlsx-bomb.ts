/**
 * Writes a small .xlsx whose one worksheet holds a header row and one data row with a huge
 * inline-string cell (B2), the shape of a decompression bomb: deflate shrinks the repeated
 * character about 1000:1. The zip is written by hand (stored sizes and CRC in the local
 * headers, then the central directory), the sheet deflated in 1 MB steps so the cell is never
 * held whole.
 */
import { crc32, createDeflateRaw, deflateRawSync } from 'node:zlib';
import { writeFileSync } from 'node:fs';

interface ZipPart {
  name: string;
  crc: number;
  size: number;
  compressed: Buffer;
}

function smallPart(name: string, text: string): ZipPart {
  const bytes = Buffer.from(text, 'utf8');
  return { name, crc: crc32(bytes), size: bytes.length, compressed: deflateRawSync(bytes) };
}

async function streamedPart(name: string, pieces: () => Generator<Buffer>): Promise<ZipPart> {
  const deflate = createDeflateRaw({ level: 9 });
  const out: Buffer[] = [];
  deflate.on('data', (chunk: Buffer) => out.push(chunk));
  const finished = new Promise<void>((resolve, reject) => {
    deflate.on('end', resolve);
    deflate.on('error', reject);
  });
  let crc = 0;
  let size = 0;
  for (const piece of pieces()) {
    crc = crc32(piece, crc);
    size += piece.length;
    if (!deflate.write(piece)) await new Promise((resolve) => deflate.once('drain', resolve));
  }
  deflate.end();
  await finished;
  return { name, crc, size, compressed: Buffer.concat(out) };
}

function zip(parts: ZipPart[]): Buffer {
  const locals: Buffer[] = [];
  const centrals: Buffer[] = [];
  let offset = 0;
  for (const part of parts) {
    const name = Buffer.from(part.name, 'utf8');
    const local = Buffer.alloc(30);
    local.writeUInt32LE(0x04034b50, 0);
    local.writeUInt16LE(20, 4); // version needed
    local.writeUInt16LE(0x0800, 6); // UTF-8 names
    local.writeUInt16LE(8, 8); // deflate
    local.writeUInt32LE(part.crc >>> 0, 14);
    local.writeUInt32LE(part.compressed.length, 18);
    local.writeUInt32LE(part.size, 22);
    local.writeUInt16LE(name.length, 26);
    locals.push(local, name, part.compressed);
    const central = Buffer.alloc(46);
    central.writeUInt32LE(0x02014b50, 0);
    central.writeUInt16LE(20, 4);
    central.writeUInt16LE(20, 6);
    central.writeUInt16LE(0x0800, 8);
    central.writeUInt16LE(8, 10);
    central.writeUInt32LE(part.crc >>> 0, 16);
    central.writeUInt32LE(part.compressed.length, 20);
    central.writeUInt32LE(part.size, 24);
    central.writeUInt16LE(name.length, 28);
    central.writeUInt32LE(offset, 42);
    centrals.push(central, name);
    offset += 30 + name.length + part.compressed.length;
  }
  const directory = Buffer.concat(centrals);
  const end = Buffer.alloc(22);
  end.writeUInt32LE(0x06054b50, 0);
  end.writeUInt16LE(parts.length, 8);
  end.writeUInt16LE(parts.length, 10);
  end.writeUInt32LE(directory.length, 12);
  end.writeUInt32LE(offset, 16);
  return Buffer.concat([...locals, directory, end]);
}

const inline = (ref: string, text: string): string => `<c r="${ref}" t="inlineStr"><is><t>${text}</t></is></c>`;

/**
 * An .xlsx with the long-form header and one row whose assessor cell (C2) is
 * `cellChars` copies of `fill`; returns the file size in bytes.
 */
export async function writeXlsxBomb(path: string, cellChars: number, fill = 'A'): Promise<{ fileBytes: number; sheetBytes: number }> {
  const header = ['session', 'date', 'assessor', 'product', 'replicate', 'attribute', 'value'];
  const columns = ['A', 'B', 'C', 'D', 'E', 'F', 'G'];
  const head =
    '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n' +
    '<worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main"><sheetData>' +
    `<row r="1">${header.map((h, i) => inline(`${columns[i]}1`, h)).join('')}</row>` +
    `<row r="2">${inline('A2', 'S1')}${inline('B2', '2026-01-05')}<c r="C2" t="inlineStr"><is><t>`;
  const tail = `</t></is></c>${inline('D2', 'P1')}<c r="E2"><v>1</v></c>${inline('F2', 'sweet')}<c r="G2"><v>4</v></c></row></sheetData></worksheet>`;
  const step = Buffer.alloc(1 << 20, fill);
  const sheet = await streamedPart('xl/worksheets/sheet1.xml', function* () {
    yield Buffer.from(head);
    for (let left = cellChars; left > 0; left -= step.length) yield left >= step.length ? step : step.subarray(0, left);
    yield Buffer.from(tail);
  });
  const parts = [
    smallPart(
      '[Content_Types].xml',
      '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types">' +
        '<Default Extension="rels" ContentType="application/vnd.openxmlformats-package.relationships+xml"/><Default Extension="xml" ContentType="application/xml"/>' +
        '<Override PartName="/xl/workbook.xml" ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.sheet.main+xml"/>' +
        '<Override PartName="/xl/worksheets/sheet1.xml" ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"/></Types>',
    ),
    smallPart(
      '_rels/.rels',
      '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships">' +
        '<Relationship Id="rId1" Type="http://schemas.openxmlformats.org/officeDocument/2006/relationships/officeDocument" Target="xl/workbook.xml"/></Relationships>',
    ),
    smallPart(
      'xl/workbook.xml',
      '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<workbook xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main" xmlns:r="http://schemas.openxmlformats.org/officeDocument/2006/relationships">' +
        '<sheets><sheet name="Ratings" sheetId="1" r:id="rId1"/></sheets></workbook>',
    ),
    smallPart(
      'xl/_rels/workbook.xml.rels',
      '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships">' +
        '<Relationship Id="rId1" Type="http://schemas.openxmlformats.org/officeDocument/2006/relationships/worksheet" Target="worksheets/sheet1.xml"/></Relationships>',
    ),
    sheet,
  ];
  const bytes = zip(parts);
  writeFileSync(path, bytes);
  return { fileBytes: bytes.length, sheetBytes: sheet.size };
}
