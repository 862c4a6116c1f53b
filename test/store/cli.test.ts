/** The import/export/backup commands, called directly and once through a real process. */
import { spawnSync } from 'node:child_process';
import { existsSync, readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { runBackupCommand, runRestoreCommand } from '../../server/cli/backup-command.js';
import { CliError } from '../../server/cli/cli-error.js';
import { runExportCommand } from '../../server/cli/export-command.js';
import { parseScaleOption, runImportCommand } from '../../server/cli/import-command.js';
import { openStore } from '../../store/open-store.js';
import { collector, tempFolder } from './helpers.js';

const HEADER = 'session,date,assessor,product,replicate,attribute,value';
let folder: string;
let remove: () => void;
beforeEach(() => ({ folder, remove } = tempFolder('cli')));
afterEach(() => remove());

function output(): { stdout: { write(t: string): void }; stderr: { write(t: string): void }; out: () => string; err: () => string } {
  let out = '';
  let err = '';
  return { stdout: { write: (t) => void (out += t) }, stderr: { write: (t) => void (err += t) }, out: () => out, err: () => err };
}

function write(name: string, lines: string[]): string {
  const path = join(folder, name);
  writeFileSync(path, `${lines.join('\n')}\n`);
  return path;
}

describe('import command', () => {
  it('prints one line per problem as file:row:column: message, then "… and N more", and exits 1', async () => {
    const lines = [HEADER];
    for (let i = 0; i < 250; i++) lines.push(`S1,2026-01-05,A${i},P1,1,sweet,${i % 2 === 0 ? 'n/a' : '4'}`);
    const io = output();
    const { exitCode } = await runImportCommand(write('week 3.csv', lines), { panel: 'crisps', db: join(folder, 's.db'), scale: '0:10' }, io);
    expect(exitCode).toBe(1);
    const errLines = io.err().trimEnd().split('\n');
    expect(errLines[0]).toMatch(/^week 3\.csv:2:value: "n\/a" is not a number/);
    expect(errLines).toHaveLength(102);
    expect(errLines[100]).toBe('… and 25 more problems (the first 100 are listed).');
    expect(errLines[101]).toMatch(/^week 3\.csv was not imported: 125 problems found/);
    expect(io.out()).toBe('');
  });

  it('succeeds with exit 0 and says when the same file changes nothing', async () => {
    const path = write('w1.csv', [HEADER, 'S1,2026-01-05,A1,P1,1,sweet,4', 'S1,2026-01-05,A1,REF,1,sweet,5']);
    const settings = write('panel.json', ['{"attributes": {"sweet": {"min": 0, "max": 15}}}']);
    const db = join(folder, 's.db');
    const first = output();
    expect((await runImportCommand(path, { panel: 'crisps', db, settings, reference: ['REF'] }, first)).exitCode).toBe(0);
    expect(first.out()).toMatch(/^Imported 2 ratings in 1 session/);
    const again = output();
    expect((await runImportCommand(path, { panel: 'crisps', db }, again)).exitCode).toBe(0);
    expect(again.out()).toMatch(/same content as import #1 .* nothing changed/);
    const store = openStore(db);
    expect(store.prepare('SELECT code, role FROM product ORDER BY code').all()).toEqual([{ code: 'P1', role: 'test' }, { code: 'REF', role: 'reference' }]);
    expect(store.prepare('SELECT scale_max AS max FROM attribute').get()).toEqual({ max: 15 });
    store.close();
  });

  it('turns bad options into plain messages', async () => {
    expect(() => parseScaleOption('10:0')).toThrow(CliError);
    expect(parseScaleOption('-5:5.5')).toEqual({ min: -5, max: 5.5 });
    await expect(runImportCommand(join(folder, 'none.csv'), { panel: 'p', db: join(folder, 's.db') }, output())).rejects.toThrow('none.csv: no such file.');
    const blocker = write('not-a-folder', ['x']);
    await expect(runImportCommand(write('b.csv', [HEADER]), { panel: 'p', db: join(blocker, 's.db') }, output())).rejects.toThrow(
      /^The store could not be opened \(E[A-Z]+\): check that the folder of --db/,
    );
    const settings = write('panel.json', ['{"scale": {"min": "0"}}']);
    await expect(runImportCommand(write('a.csv', [HEADER]), { panel: 'p', db: join(folder, 's.db'), settings }, output())).rejects.toThrow(/panel\.json: \/scale\/min: /);
  });
});

describe('export, backup and restore commands', () => {
  it('exports to a file, and a restored backup exports the same bytes', async () => {
    const db = join(folder, 's.db');
    await runImportCommand(write('w1.csv', [HEADER, 'S1,2026-01-05,A1,P1,1,sweet,4.25']), { panel: 'crisps', db, scale: '0:10' }, output());
    const exported = join(folder, 'out.csv');
    expect((await runExportCommand({ panel: 'crisps', db, format: 'csv', out: exported })).nRatings).toBe(1);
    expect(readFileSync(exported, 'utf8')).toBe('session,date,assessor,product,replicate,attribute,value,code\nS1,2026-01-05,A1,P1,1,sweet,4.25,\n');
    await expect(runExportCommand({ panel: 'nope', db, format: 'csv' }, collector().out)).rejects.toThrow(/no panel named "nope".*Panels in it: "crisps"/);
    await expect(runExportCommand({ panel: 'crisps', db, format: 'xml' }, collector().out)).rejects.toThrow(/--format must be csv or json/);

    const backup = join(folder, 'backup.db');
    expect((await runBackupCommand({ db, out: backup })).nRatings).toBe(1);
    await expect(runBackupCommand({ db, out: backup })).rejects.toThrow(/already exists/);
    await expect(runRestoreCommand({ from: backup, db })).rejects.toThrow(/already holds 1 panel; add --force/);
    const restoredPath = join(folder, 'restored', 'r.db');
    expect((await runRestoreCommand({ from: backup, db: restoredPath })).nRatings).toBe(1);
    const again = collector();
    await runExportCommand({ panel: 'crisps', db: restoredPath, format: 'csv' }, again.out);
    expect(again.text()).toBe(readFileSync(exported, 'utf8'));
  });
});

const BUILT = existsSync(join(import.meta.dirname, '..', '..', 'dist', 'server', 'cli', 'main.js'));

describe('the real program', () => {
  // `npm test` builds first; a plain `npx vitest run` on a fresh clone has no dist/ yet.
  it.skipIf(!BUILT)('bin/panel-steward imports, exports and backs up from the build (migrations found from dist/)', () => {
    const ok = write('ok.csv', [HEADER, 'S1,2026-01-05,A1,P1,1,sweet,5', 'S1,2026-01-05,A1,P2,1,sweet,6.25']);
    const run = (...args: string[]) => spawnSync(process.execPath, ['bin/panel-steward', ...args], { cwd: join(import.meta.dirname, '..', '..'), encoding: 'utf8', timeout: 90_000 });
    const db = join(folder, 'bin.db');
    const imported = run('import', ok, '--panel', 'crisps', '--db', db, '--scale', '0:10');
    expect(imported.status).toBe(0);
    expect(imported.stdout).toMatch(/^Imported 2 ratings in 1 session/);
    const exported = run('export', '--panel', 'crisps', '--db', db, '--format', 'json');
    expect(exported.status).toBe(0);
    expect(JSON.parse(exported.stdout).map((r: { value: number }) => r.value)).toEqual([5, 6.25]);
    const backedUp = run('backup', '--db', db, '--out', join(folder, 'copy.db'));
    expect(backedUp.status).toBe(0);
    expect(backedUp.stdout).toMatch(/integrity check passed/);
  }, 180_000);

  it('exits non-zero with the problems on stderr and no stack trace', () => {
    const bad = write('bad.csv', [HEADER, 'S1,2026-01-05,A1,P1,1,sweet,-3']);
    const result = spawnSync(process.execPath, ['--import', 'tsx', 'server/cli/main.ts', 'import', bad, '--panel', 'crisps', '--db', join(folder, 's.db'), '--scale', '0:10'], {
      cwd: join(import.meta.dirname, '..', '..'),
      encoding: 'utf8',
      timeout: 90_000,
    });
    expect(result.status).toBe(1);
    expect(result.stderr).toMatch(/^bad\.csv:2:value: -3 is outside the 0–10 scale/);
    expect(result.stderr).not.toMatch(/\n\s+at /);
    expect(result.stderr).not.toContain(folder);
    const missing = spawnSync(process.execPath, ['--import', 'tsx', 'server/cli/main.ts', 'import', join(folder, 'gone.csv'), '--panel', 'crisps', '--db', join(folder, 's.db')], {
      cwd: join(import.meta.dirname, '..', '..'),
      encoding: 'utf8',
      timeout: 90_000,
    });
    expect(missing.status).toBe(2);
    expect(missing.stderr).toBe('gone.csv: no such file.\n');
  }, 180_000);
});
