/** What a file is, decided from its first bytes (magic numbers), not from its name. */
export type FileKind = 'empty' | 'csv' | 'xlsx' | 'xls' | 'binary';

/**
 * Classify a file from its first bytes (8 are enough).
 * - `xlsx`: a ZIP container (PK\x03\x04), which is what .xlsx is;
 * - `xls`: the legacy OLE2 compound document (D0 CF 11 E0), not readable here;
 * - `binary`: other well-known binary signatures (PDF, PNG, JPEG, GZIP);
 * - `csv`: anything else; the CSV reader still checks encoding and NUL bytes.
 */
export function detectFileKind(head: Uint8Array): FileKind {
  if (head.length === 0) return 'empty';
  const b = (i: number): number => (i < head.length ? head[i] : -1);
  if (b(0) === 0x50 && b(1) === 0x4b && b(2) === 0x03 && b(3) === 0x04) return 'xlsx';
  if (b(0) === 0xd0 && b(1) === 0xcf && b(2) === 0x11 && b(3) === 0xe0) return 'xls';
  if (b(0) === 0x25 && b(1) === 0x50 && b(2) === 0x44 && b(3) === 0x46) return 'binary'; // %PDF
  if (b(0) === 0x89 && b(1) === 0x50 && b(2) === 0x4e && b(3) === 0x47) return 'binary'; // PNG
  if (b(0) === 0xff && b(1) === 0xd8 && b(2) === 0xff) return 'binary'; // JPEG
  if (b(0) === 0x1f && b(1) === 0x8b) return 'binary'; // GZIP
  return 'csv';
}
