/**
 * The folder rules of DEVELOPERS.md, enforced by reading import lines (no build needed):
 * which folder may import which, which packages each folder may use, and that templates
 * only ever escape their output. A failure names the file and the import to remove.
 */
import { readdirSync, readFileSync, statSync } from 'node:fs';
import { dirname, join, relative, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';

const ROOT = resolve(dirname(fileURLToPath(import.meta.url)), '..');

interface ImportLine {
  file: string; // relative to the project, with forward slashes
  specifier: string;
  isTypeOnly: boolean;
}

function listFiles(folder: string, extension: string): string[] {
  const absolute = join(ROOT, folder);
  let entries: string[];
  try {
    entries = readdirSync(absolute);
  } catch {
    return [];
  }
  return entries.flatMap((name) => {
    const path = join(absolute, name);
    if (statSync(path).isDirectory()) return name === 'node_modules' ? [] : listFiles(join(folder, name), extension);
    return name.endsWith(extension) && !name.endsWith('.d.ts') ? [join(folder, name).split('\\').join('/')] : [];
  });
}

const STATIC_IMPORT = /^\s*(import|export)\s+(type\s+)?[^;'"]*?\bfrom\s+['"]([^'"]+)['"]/gm;
const SIDE_EFFECT_IMPORT = /^\s*import\s+['"]([^'"]+)['"]/gm;
const DYNAMIC_IMPORT = /\bimport\(\s*['"]([^'"]+)['"]\s*\)/g;

export function readImports(file: string): ImportLine[] {
  const text = readFileSync(join(ROOT, file), 'utf8');
  const lines: ImportLine[] = [];
  for (const match of text.matchAll(STATIC_IMPORT)) lines.push({ file, specifier: match[3], isTypeOnly: match[2] !== undefined });
  for (const match of text.matchAll(SIDE_EFFECT_IMPORT)) lines.push({ file, specifier: match[1], isTypeOnly: false });
  for (const match of text.matchAll(DYNAMIC_IMPORT)) lines.push({ file, specifier: match[1], isTypeOnly: false });
  return lines;
}

/** The top-level project folder an import points into, or the package name. */
function target(line: ImportLine): { kind: 'folder' | 'package' | 'node'; name: string; path: string } {
  if (line.specifier.startsWith('.')) {
    const path = relative(ROOT, resolve(ROOT, dirname(line.file), line.specifier)).split('\\').join('/');
    return { kind: 'folder', name: path.split('/')[0], path };
  }
  if (line.specifier.startsWith('node:')) return { kind: 'node', name: line.specifier, path: line.specifier };
  const parts = line.specifier.split('/');
  const name = line.specifier.startsWith('@') ? parts.slice(0, 2).join('/') : parts[0];
  return { kind: 'package', name, path: line.specifier };
}

interface FolderRule {
  /** Project folders it may import values from. */
  folders: string[];
  /** Project folders it may import types from (`import type`) only. */
  typeOnlyFolders: string[];
  /** Packages it may import; paths below the folder listed per package where restricted. */
  packages: Record<string, string | null>;
  /** May use node: built-ins (file system, streams, crypto). */
  mayUseNode: boolean;
}

/**
 * DEVELOPERS.md "Data flow and folders", plus the packages each stage was given. Additions to
 * the table are named with their reason.
 */
const RULES: Record<string, FolderRule> = {
  domain: { folders: ['domain'], typeOnlyFolders: [], packages: {}, mayUseNode: false },
  ingest: {
    folders: ['domain', 'ingest'],
    typeOnlyFolders: [],
    packages: { 'csv-parse': null, papaparse: null, exceljs: null, 'iconv-lite': null },
    mayUseNode: true,
  },
  store: {
    folders: ['domain', 'ingest', 'store'],
    typeOnlyFolders: ['analysis'],
    // csv-stringify: export writes the long-form CSV; typebox: checks the panel settings file.
    packages: { 'better-sqlite3': null, 'csv-stringify': null, '@sinclair/typebox': null },
    mayUseNode: true,
  },
  analysis: {
    // domain holds types, constant lists and the level coder only (see DOMAIN_CODE below).
    folders: ['domain', 'analysis'],
    typeOnlyFolders: [],
    // typebox: pure validation of threshold settings (no I/O).
    packages: { 'ml-matrix': 'analysis/linalg/', jstat: 'analysis/distributions/', '@sinclair/typebox': null },
    mayUseNode: false,
  },
  report: {
    folders: ['domain', 'report'],
    typeOnlyFolders: ['analysis'],
    // d3-scale/d3-shape: pure geometry for the SVG charts.
    packages: { 'd3-scale': null, 'd3-shape': null },
    mayUseNode: false,
  },
  monitor: {
    // The application layer of the review pages: loads one panel context from the store, then
    // pure page builders over it (analysis for the series, report for the view pieces).
    folders: ['domain', 'analysis', 'report', 'store', 'monitor'],
    typeOnlyFolders: [],
    packages: { 'better-sqlite3': null },
    mayUseNode: false,
  },
  demo: {
    folders: ['domain', 'demo'],
    typeOnlyFolders: [],
    // exceljs: writes the wide .xlsx sample; node: writes the sample files.
    packages: { exceljs: null },
    mayUseNode: true,
  },
};

/**
 * demo/load-demo.ts loads the demo through the real import path, so it reaches into store/ (and
 * names the store's connection type).
 */
const EXCEPTIONS: { file: string; target: string }[] = [
  { file: 'demo/load-demo.ts', target: 'store' },
  { file: 'demo/load-demo.ts', target: 'better-sqlite3' },
];
const isException = (file: string, name: string) => EXCEPTIONS.some((e) => e.file === file && e.target === name);

function violations(folder: string): string[] {
  const rule = RULES[folder];
  const problems: string[] = [];
  for (const file of listFiles(folder, '.ts')) {
    for (const line of readImports(file)) {
      const to = target(line);
      const where = `${file}: import '${line.specifier}'`;
      if (to.kind === 'node') {
        if (!rule.mayUseNode) problems.push(`${where} (${folder}/ does no I/O)`);
      } else if (to.kind === 'package') {
        if (isException(file, to.name)) continue;
        if (!(to.name in rule.packages)) problems.push(`${where} (package not allowed in ${folder}/)`);
        else {
          const onlyBelow = rule.packages[to.name];
          if (onlyBelow !== null && !file.startsWith(onlyBelow)) problems.push(`${where} (${to.name} only in ${onlyBelow})`);
        }
      } else if (!rule.folders.includes(to.name)) {
        if (isException(file, to.name)) continue;
        if (rule.typeOnlyFolders.includes(to.name) && line.isTypeOnly) continue;
        const hint = rule.typeOnlyFolders.includes(to.name) ? ' (only `import type` from there)' : '';
        problems.push(`${where} (${folder}/ may not import ${to.name}/${hint})`);
      }
    }
  }
  return problems;
}

/**
 * domain/ is types and constant lists; the files here may also hold code because every stage
 * needs the same one and it has no dependencies (DEVELOPERS.md).
 */
const DOMAIN_CODE = [
  'domain/level-coder.ts',
  // isDataEntryKind: the membership test that goes with the contract's list of data-entry kinds.
  'domain/flags.ts',
];

describe('folder import rules (DEVELOPERS.md)', () => {
  it('domain/ holds no functions or classes outside the listed files', () => {
    const problems = listFiles('domain', '.ts')
      .filter((file) => !DOMAIN_CODE.includes(file))
      .filter((file) => /^\s*(export\s+)?(async\s+)?(function|class)\s|=>/m.test(readFileSync(join(ROOT, file), 'utf8').replace(/\/\*[\s\S]*?\*\//g, '')))
      .map((file) => `${file}: code in domain/ (types and constants only, or list it in DOMAIN_CODE with its reason)`);
    expect(problems).toEqual([]);
  });

  it.each(Object.keys(RULES))('%s/ imports only what it may', (folder) => {
    expect(violations(folder)).toEqual([]);
  });

  it('nothing but bin/, tests and benchmarks imports server/', () => {
    const problems = Object.keys(RULES).flatMap((folder) =>
      listFiles(folder, '.ts').flatMap((file) =>
        readImports(file)
          .filter((line) => target(line).kind === 'folder' && target(line).name === 'server')
          .map((line) => `${file}: import '${line.specifier}'`),
      ),
    );
    expect(problems).toEqual([]);
  });

  it('routes compute nothing: no file in server/routes/ imports an analysis/ module (monitor/ builds their pages)', () => {
    const routes = listFiles('server/routes', '.ts');
    expect(routes).toEqual(expect.arrayContaining(['server/routes/monitor.ts', 'server/routes/review.ts']));
    const problems = routes.flatMap((file) =>
      readImports(file)
        .filter((line) => target(line).kind === 'folder' && target(line).name === 'analysis')
        .map((line) => `${file}: import '${line.specifier}'`),
    );
    expect(problems).toEqual([]);
    for (const file of ['server/routes/monitor.ts', 'server/routes/review.ts']) {
      expect(readImports(file).some((line) => target(line).name === 'monitor')).toBe(true);
    }
  });

  it('production code never imports tests or benchmarks', () => {
    const problems = [...Object.keys(RULES), 'server'].flatMap((folder) =>
      listFiles(folder, '.ts').flatMap((file) =>
        readImports(file)
          .filter((line) => target(line).kind === 'folder' && ['test', 'bench'].includes(target(line).name))
          .map((line) => `${file}: import '${line.specifier}'`),
      ),
    );
    expect(problems).toEqual([]);
  });

  it('reads multi-line, type-only, side-effect and dynamic imports', () => {
    // The checker itself: this file's own imports are found, with their kinds.
    const own = readImports('test/architecture.test.ts');
    expect(own.map((line) => line.specifier)).toEqual(expect.arrayContaining(['node:fs', 'node:path', 'vitest']));
    expect(own.find((line) => line.specifier === 'vitest')?.isTypeOnly).toBe(false);
  });
});

describe('templates', () => {
  const templates = listFiles('templates', '.hbs');

  it('exist', () => {
    expect(templates.length).toBeGreaterThan(5);
  });

  it('escape everything: no triple braces, no inline scripts or event handlers', () => {
    const problems = templates.flatMap((file) => {
      const text = readFileSync(join(ROOT, file), 'utf8');
      const found: string[] = [];
      if (text.includes('{{{')) found.push(`${file}: unescaped {{{ }}} output`);
      if (/<script/i.test(text)) found.push(`${file}: <script>`);
      if (/\son[a-z]+\s*=/i.test(text)) found.push(`${file}: inline event handler`);
      if (/\sstyle\s*=/i.test(text)) found.push(`${file}: inline style (blocked by the content security policy)`);
      return found;
    });
    expect(problems).toEqual([]);
  });
});

describe('file length', () => {
  // A long file is allowed only with its reason written at its top ("Longer than 400 lines: …").
  const SOURCE_FOLDERS = ['analysis', 'domain', 'ingest', 'monitor', 'report', 'server', 'store', 'bench', 'bin'];
  it('no source file outside test/ and demo/ is over 400 lines without a written reason at its top', () => {
    const problems = SOURCE_FOLDERS.flatMap((folder) => listFiles(folder, '.ts'))
      .filter((file) => {
        const lines = readFileSync(join(ROOT, file), 'utf8').split('\n');
        return lines.length > 400 && !lines.slice(0, 40).some((line) => line.includes('Longer than 400 lines:'));
      });
    expect(problems).toEqual([]);
  });
});
