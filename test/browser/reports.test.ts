/**
 * The reports in a real browser (Debian's Chromium) on a generated year (52 sessions, 12
 * assessors, 10 attributes, refitted): the session report shows the product test and the variance
 * components of every attribute; an assessor's feedback sheet shows no other assessor's code; the
 * printed PDF carries the panel, the period, the generation date and the cautions on every page;
 * the file from `panel-steward report` holds the same tables and charts as the page. No page is
 * wider than a 1,280 px window. Screen shots go to the temp folder (out of git).
 */
import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import type { AddressInfo } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { FastifyInstance } from 'fastify';
import { chromium, type Browser, type Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildApp } from '../../server/app.js';
import { renderReportFile } from '../../server/cli/report-command.js';
import { openStore, type Database } from '../../store/open-store.js';
import { pdfText } from '../helpers/pdf-text.js';
import { yearPanel, yearStorePath } from '../reports/year-store.js';

const CHROMIUM = '/usr/bin/chromium';
const hasChromium = existsSync(CHROMIUM);
if (!hasChromium) console.warn(`browser tests skipped: ${CHROMIUM} is not installed (apt-get install chromium)`);
const SHOTS = tmpdir();
const PANEL = yearPanel().panelName;
const enc = encodeURIComponent(PANEL);
const ALL_ASSESSORS = Array.from({ length: 12 }, (_, i) => `A${String(i + 1).padStart(2, '0')}`);

/** Whitespace-free, ligatures unfolded: PDF text runs are split and spaced arbitrarily. */
const squash = (text: string) => text.normalize('NFKC').replace(/\s+/g, '');

describe.skipIf(!hasChromium)('reports in a browser', () => {
  let dir: string;
  let storePath: string;
  let db: Database;
  let app: FastifyInstance;
  let browser: Browser;
  let base: string;
  const problems: string[] = [];

  async function open(path: string, shot: string): Promise<Page> {
    const page = await browser.newPage({ viewport: { width: 1280, height: 900 } });
    page.on('console', (message) => {
      if (message.type() === 'error' || message.type() === 'warning') problems.push(`${path}: ${message.text()}`);
    });
    page.on('requestfailed', (request) => problems.push(`${path}: failed ${request.url()}`));
    const response = await page.goto(base + path);
    expect(response?.status(), path).toBe(200);
    expect(await page.evaluate('document.documentElement.scrollWidth'), `${path} width`).toBeLessThanOrEqual(1280);
    await page.screenshot({ path: join(SHOTS, `panel-steward-${shot}.png`), fullPage: false });
    return page;
  }

  beforeAll(async () => {
    dir = mkdtempSync(join(tmpdir(), 'report-browser-'));
    storePath = await yearStorePath(join(dir, 'year.db'));
    db = openStore(storePath);
    app = await buildApp({ db });
    await app.listen({ host: '127.0.0.1', port: 0 });
    base = `http://127.0.0.1:${(app.server.address() as AddressInfo).port}`;
    browser = await chromium.launch({
      executablePath: CHROMIUM,
      args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-component-update', '--disable-sync'],
    });
  }, 600_000);
  afterAll(async () => {
    await browser?.close();
    await app?.close();
    db?.close();
    rmSync(dir, { recursive: true, force: true });
  });

  it('the session report shows the product test and the variance components of every attribute', async () => {
    const page = await open(`/panels/${enc}/sessions/S30`, 'session');
    await page.click('a:text("Session report")');
    await page.waitForSelector('article.attribute-report');
    expect(await page.textContent('h1')).toBe('Session report S30');
    const articles = await page.$$('article.attribute-report');
    expect(articles).toHaveLength(10);
    for (const article of articles) {
      const test = await article.$eval('table.product-test', (t) => t.textContent ?? '');
      expect(test).toMatch(/F\s*[\d.]+/);
      expect(test).toMatch(/p\s*(< 0\.001|0\.\d+)/);
      const components = await article.$$eval('table.variance-components tbody tr', (rows) => rows.map((r) => r.querySelector('th')?.textContent ?? ''));
      expect(components).toEqual(['Assessors’ level differences', 'Assessor × product disagreement', 'Replicate noise']);
      expect(await article.$$('svg.small-chart')).toHaveLength(2);
    }
    await page.screenshot({ path: join(SHOTS, 'panel-steward-session-report.png'), fullPage: false });
    await page.close();
  }, 120_000);

  it('the range report opens and stays within 1,280 px', async () => {
    const page = await open(`/panels/${enc}/report?from=S41&to=S52`, 'range-report');
    expect(await page.$$('article.attribute-report')).toHaveLength(10);
    await page.close();
  }, 120_000);

  it("an assessor's feedback sheet shows no other assessor's code", async () => {
    const page = await open(`/panels/${enc}/assessors/A03/feedback?session=S30`, 'feedback');
    const text = await page.evaluate('document.documentElement.outerHTML') as string;
    expect(text).toContain('A03');
    for (const other of ALL_ASSESSORS.filter((a) => a !== 'A03')) expect(text, other).not.toContain(other);
    expect(await page.$$('svg.small-chart')).toHaveLength(4);
    await page.close();
  }, 120_000);

  it('the printed session report carries panel, period, generation date and cautions on every page', async () => {
    const page = await open(`/panels/${enc}/sessions/S30/report`, 'session-report-top');
    const generated = (await page.textContent('.report-meta time')) ?? '';
    expect(generated).toMatch(/^\d{4}-\d{2}-\d{2} \d{2}:\d{2}/);
    const text = squash(pdfText(await page.pdf({ format: 'A4' })));
    // The page number box of the print stylesheet says "page 1 of N".
    const pages = Number(/page1of(\d+)/.exec(text)?.[1]);
    expect(pages).toBeGreaterThan(1);
    const count = (needle: string) => text.split(squash(needle)).length - 1;
    expect(count(`Panel: ${PANEL}`)).toBe(pages);
    expect(count('Period: Session S30, ')).toBe(pages);
    expect(count(`Generated: ${generated}`)).toBe(pages);
    expect(count('Flags are evidence for review, not judgements of people.')).toBe(pages);
    expect(count('No flag is not proof of good performance')).toBe(pages);
    expect(count('Samples are small')).toBe(pages);
    expect(count('The model assumes')).toBe(pages);
    await page.close();
  }, 120_000);

  it('the report file holds the same tables and charts as the page and loads nothing from elsewhere', async () => {
    const html = renderReportFile({ panel: PANEL, db: storePath, session: 'S30' });
    const page = await browser.newPage({ viewport: { width: 1280, height: 900 } });
    const requests: string[] = [];
    page.on('request', (request) => requests.push(request.url()));
    await page.setContent(html);
    const shape = (p: Page) =>
      p.evaluate(`[...document.querySelectorAll('main table.data caption, main svg.small-chart title')].map((e) => e.textContent.trim())`) as Promise<string[]>;
    const fromFile = await shape(page);
    await page.screenshot({ path: join(SHOTS, 'panel-steward-report-file.png'), fullPage: false });
    const served = await open(`/panels/${enc}/sessions/S30/report`, 'session-report-again');
    expect(fromFile.length).toBeGreaterThan(40);
    expect(fromFile).toEqual(await shape(served));
    expect(requests.filter((url) => !url.startsWith('about:') && !url.startsWith('data:'))).toEqual([]);
    await page.close();
    await served.close();
  }, 120_000);

  it('no console errors and no failed requests on any report page', () => {
    expect(problems).toEqual([]);
  });
});
