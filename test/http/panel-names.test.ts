/** Panel names on the HTTP API and the command line: "..", punctuation only, hidden characters are refused; NFC. */
import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { CliError } from '../../server/cli/cli-error.js';
import { runImportCommand } from '../../server/cli/import-command.js';
import { openStore } from '../../store/open-store.js';
import { tempFolder } from '../store/helpers.js';
import { csrfFrom, formData, freshApps, longCsv, SMALL_SESSION_ROWS } from './http-helpers.js';

const apps = freshApps();
const cleanups: (() => void)[] = [];
afterEach(() => cleanups.splice(0).forEach((f) => f()));

describe('panel names', () => {
  it('the import API refuses "..", punctuation-only and hidden-character names with 400 and stores nothing', async () => {
    const { app, db } = await apps();
    for (const encoded of ['%2E%2E', '.', '%2E', '-%2F-', encodeURIComponent('crisps\u202e'), encodeURIComponent('cri\u200bsps')]) {
      const response = await app.inject({
        method: 'POST',
        url: `/api/panels/${encoded}/imports?fileName=w.csv&scaleMin=0&scaleMax=10`,
        headers: { 'content-type': 'text/csv' },
        payload: longCsv(SMALL_SESSION_ROWS),
      });
      expect([400, 404], encoded).toContain(response.statusCode);
      if (response.statusCode === 400) expect(response.json()).toMatchObject({ ok: false, code: 'UPLOAD_BAD_OPTION' });
    }
    expect(db.prepare('SELECT count(*) AS n FROM panel').get()).toEqual({ n: 0 });
  });

  it('the upload form refuses a panel named ".." (the case that created an unreachable panel)', async () => {
    const { app, db } = await apps();
    for (const panel of ['..', '.', 'oat\u200b']) {
      const { token, cookie } = csrfFrom(await app.inject({ url: '/upload' }));
      const response = await app.inject({
        method: 'POST',
        url: '/upload',
        headers: { cookie, accept: 'application/json' },
        payload: formData({ _csrf: token, panel, scaleMin: '0', scaleMax: '10' }, { name: 'w.csv', content: longCsv(SMALL_SESSION_ROWS) }),
      });
      expect(response.statusCode, panel).toBe(400);
      expect(response.body).toContain(panel === 'oat\u200b' ? 'U+200B (zero-width space)' : 'is only punctuation');
    }
    expect(db.prepare('SELECT count(*) AS n FROM panel').get()).toEqual({ n: 0 });
  });

  it('NFD and NFC spellings of a panel name reach one panel', async () => {
    const { app, db } = await apps();
    for (const name of ['Cre\u0300me', 'Cr\u00e8me']) {
      const response = await app.inject({
        method: 'POST',
        url: `/api/panels/${encodeURIComponent(name)}/imports?fileName=${name === 'Cr\u00e8me' ? 'b' : 'a'}.csv&scaleMin=0&scaleMax=10`,
        headers: { 'content-type': 'text/csv' },
        payload: longCsv(SMALL_SESSION_ROWS),
      });
      expect(response.statusCode).toBeLessThan(300);
    }
    expect(db.prepare('SELECT name FROM panel').all()).toEqual([{ name: 'Cr\u00e8me' }]);
  });

  it('the import command refuses the same names with exit code 2', async () => {
    const { folder, remove } = tempFolder('names');
    cleanups.push(remove);
    const file = join(folder, 'w.csv');
    writeFileSync(file, longCsv(SMALL_SESSION_ROWS));
    const db = join(folder, 's.db');
    for (const panel of ['..', '.', '--', 'a\u200bb', 'x\u2066y']) {
      const error = await runImportCommand(file, { panel, db, scale: '0:10' }).catch((e: unknown) => e);
      expect(error, panel).toBeInstanceOf(CliError);
      expect((error as CliError).exitCode).toBe(2);
      expect((error as CliError).message).toMatch(/^--panel: The panel name /);
    }
    const store = openStore(db);
    expect(store.prepare('SELECT count(*) AS n FROM panel').get()).toEqual({ n: 0 });
    store.close();
  });
});
