/**
 * A person's path through the web pages in a real browser (headless Chromium): open the upload
 * page, send the sample CSV through the form, read the result, follow it to the session. Screen
 * shots go to the system temp folder for a look. Skipped, with a message, where Chromium is not
 * installed (CI installs it).
 */
import { existsSync } from 'node:fs';
import type { AddressInfo } from 'node:net';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import type { FastifyInstance } from 'fastify';
import { chromium, type Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildApp } from '../../server/app.js';
import { openStore, type Database } from '../../store/open-store.js';

const CHROMIUM = '/usr/bin/chromium';
const hasChromium = existsSync(CHROMIUM);
if (!hasChromium) console.warn(`browser tests skipped: ${CHROMIUM} is not installed (apt-get install chromium)`);

const ROOT = resolve(import.meta.dirname, '../..');
const SAMPLE = join(ROOT, 'sample-data', 'session-S01-long.csv');
const SHOTS = tmpdir();

describe.skipIf(!hasChromium)('upload in a browser', () => {
  let db: Database;
  let app: FastifyInstance;
  let browser: Browser;
  let baseUrl: string;

  beforeAll(async () => {
    db = openStore(':memory:');
    app = await buildApp({ db });
    await app.listen({ host: '127.0.0.1', port: 0 });
    baseUrl = `http://127.0.0.1:${(app.server.address() as AddressInfo).port}`;
    browser = await chromium.launch({
      executablePath: CHROMIUM,
      args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking'],
    });
  });
  afterAll(async () => {
    await browser?.close();
    await app?.close();
    db?.close();
  });

  it('sends the sample file through the form and shows the result, then the session', async () => {
    const page = await browser.newPage({ viewport: { width: 1200, height: 900 } });
    const consoleProblems: string[] = [];
    page.on('console', (message) => {
      // the rejected upload below is answered 422 on purpose; anything else is a problem
      const isExpected = message.text().includes('status of 422');
      if ((message.type() === 'error' || message.type() === 'warning') && !isExpected) consoleProblems.push(message.text());
    });

    await page.goto(`${baseUrl}/upload`);
    await page.fill('#panel', 'Oat drink panel');
    await page.setInputFiles('#file', SAMPLE);
    await page.fill('#scaleMin', '0');
    await page.fill('#scaleMax', '10');
    await page.click('button[type=submit]');
    await page.waitForSelector('#result-heading');
    expect(await page.textContent('#result-heading')).toBe('Imported');
    const ratingsStored = await page.textContent('table.counts tr:nth-child(2) td');
    expect(ratingsStored?.trim()).toBe('800');
    await page.screenshot({ path: join(SHOTS, 'panel-steward-upload-result.png'), fullPage: true });

    // the same result the API gives: the import's JSON twin has the same count
    const twin = (await (await fetch(`${baseUrl}/imports/1.json`)).json()) as { result: { counts: { key: string; value: number }[] } };
    expect(twin.result.counts.find((count) => count.key === 'ratings')?.value).toBe(800);

    await page.click('a:text-is("S01")');
    await page.waitForSelector('table.ratings');
    expect(await page.textContent('h1')).toBe('Session S01');
    await page.screenshot({ path: join(SHOTS, 'panel-steward-session.png'), fullPage: false });

    await page.goto(`${baseUrl}/panels/${encodeURIComponent('Oat drink panel')}`);
    await page.screenshot({ path: join(SHOTS, 'panel-steward-panel.png'), fullPage: true });

    // a rejected file: the problems are listed by row and column
    await page.goto(`${baseUrl}/upload`);
    await page.fill('#panel', 'Oat drink panel');
    await page.setInputFiles('#file', {
      name: 'broken.csv',
      mimeType: 'text/csv',
      buffer: Buffer.from('session,date,assessor,product,replicate,attribute,value\nS09,2026-03-31,A01,REF,1,sweetness,5\nS09,2026-03-31,A02,REF,1,sweetness,abc\n'),
    });
    await page.click('button[type=submit]');
    await page.waitForSelector('table.problems');
    const problemRow = await page.textContent('table.problems tbody tr');
    expect(problemRow).toContain('broken.csv');
    expect(problemRow).toContain('3');
    expect(problemRow).toContain('value');
    await page.screenshot({ path: join(SHOTS, 'panel-steward-upload-rejected.png'), fullPage: true });

    expect(consoleProblems).toEqual([]); // no CSP violations, no failed resources
    await page.close();
  }, 60_000);
});
