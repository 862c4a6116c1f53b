/**
 * Every "§x.y" written anywhere in the project (code comments, threshold descriptions, flag
 * evidence, templates, tests, documents) must name a numbered heading of docs/methods.md, the
 * document pages link to. A reference to a section that does not exist fails here with the file,
 * line and reference.
 */
import { readdirSync, readFileSync, statSync } from 'node:fs';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { findMethodsReferences, linkMethodsReferences, methodsHeadings, sectionAnchor } from '../../report/methods-references.js';

const ROOT = resolve(dirname(fileURLToPath(import.meta.url)), '../..');
const FOLDERS = ['analysis', 'bench', 'bin', 'demo', 'docs', 'domain', 'ingest', 'migrations', 'report', 'server', 'store', 'templates', 'test'];
const EXTENSIONS = ['.ts', '.mjs', '.hbs', '.md', '.R', '.sql', '.css'];
const SKIP = new Set(['node_modules', 'dist', 'cache', 'json']);

function listFiles(folder: string): string[] {
  const absolute = join(ROOT, folder);
  let names: string[];
  try {
    names = readdirSync(absolute);
  } catch {
    return [];
  }
  return names.flatMap((name) => {
    if (SKIP.has(name)) return [];
    const path = join(folder, name);
    if (statSync(join(ROOT, path)).isDirectory()) return listFiles(path);
    return EXTENSIONS.some((extension) => name.endsWith(extension)) ? [path.split('\\').join('/')] : [];
  });
}

const methods = readFileSync(join(ROOT, 'docs/methods.md'), 'utf8');
const sections = new Set(methodsHeadings(methods).map((h) => h.section));

/** Every reference with where it was written and the sections it names that have no heading. */
function unresolved(files: readonly string[], known: ReadonlySet<string>): { where: string; reference: string; missing: string[] }[] {
  const out: { where: string; reference: string; missing: string[] }[] = [];
  for (const file of files) {
    readFileSync(join(ROOT, file), 'utf8')
      .split('\n')
      .forEach((line, i) => {
        for (const reference of findMethodsReferences(line)) {
          const missing = reference.sections.filter((section) => !known.has(section));
          if (missing.length > 0) out.push({ where: `${file}:${i + 1}`, reference: reference.text, missing });
        }
      });
  }
  return out;
}

describe('methods references', () => {
  const files = [...FOLDERS.flatMap(listFiles), 'README.md', 'DEVELOPERS.md'];

  it('the document has numbered headings for every chapter 0–8', () => {
    for (const chapter of ['0', '1', '2', '3', '4', '5', '6', '7', '8']) expect(sections.has(chapter), `chapter ${chapter}`).toBe(true);
    expect(sections.size).toBeGreaterThan(60);
  });

  it('every reference in the project resolves to a heading of docs/methods.md', () => {
    const total = files.reduce((n, file) => n + findMethodsReferences(readFileSync(join(ROOT, file), 'utf8')).length, 0);
    expect(total).toBeGreaterThan(100); // the scan really reads the sources
    expect(unresolved(files, sections)).toEqual([]);
  });

  it('a reference to a missing section is reported (the check can fail)', () => {
    const withoutOne = new Set(sections);
    withoutOne.delete('3.7c');
    const found = unresolved(['analysis/monitor/stability.ts'], withoutOne);
    expect(found.some((f) => f.missing.includes('3.7c'))).toBe(true);
  });

  it('reads ranges, lettered ranges and chapters', () => {
    const parse = (text: string) => findMethodsReferences(text).map((r) => r.sections);
    expect(parse('methods \u00a71.2\u20131.3 and \u00a73.7 b\u2013d; \u00a75.3b. \u00a72, \u00a76')).toEqual([['1.2', '1.3'], ['3.7b', '3.7c', '3.7d'], ['5.3b'], ['2'], ['6']]);
    expect(linkMethodsReferences('see \u00a73.4 (CP)')).toEqual([
      { text: 'see ', href: null },
      { text: '\u00a73.4', href: `/methods#${sectionAnchor('3.4')}` },
      { text: ' (CP)', href: null },
    ]);
  });
});
