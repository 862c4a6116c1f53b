/**
 * The command line for people, through the built CLI (bin/panel-steward, as `npm test` builds it):
 * --version, analyze --format text beside an unchanged --format json (byte for byte the output
 * from before the text format existed), flags --format text, a closed pipe ending quietly, and
 * `report --out FILE.html` writing one self-contained file.
 */
import { execFile, spawn } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { promisify } from 'node:util';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { toLongCsv } from '../../demo/generate-panel.js';
import { yearPanel, yearStorePath } from './year-store.js';

const ROOT = resolve(import.meta.dirname, '../..');
const BIN = join(ROOT, 'bin', 'panel-steward');
const run = promisify(execFile);
const cli = (args: string[]) => run(process.execPath, [BIN, ...args], { cwd: ROOT, maxBuffer: 64 * 1024 * 1024 });

let dir: string;
let store: string;
const PANEL = yearPanel().panelName;

beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'report-cli-'));
  store = await yearStorePath(join(dir, 'year.db'));
}, 600_000);
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('the CLI speaks to people', () => {
  it('--version prints the version of package.json', async () => {
    const { stdout } = await cli(['--version']);
    expect(stdout.trim()).toBe(JSON.parse(readFileSync(join(ROOT, 'package.json'), 'utf8')).version);
  });

  it('analyze --format json is byte-identical to the output before the text format; --format text summarises', async () => {
    const sample = join(ROOT, 'sample-data', 'session-S01-long.csv');
    const { stdout: json } = await cli(['analyze', sample, '--format', 'json']);
    expect(json).toBe(readFileSync(join(ROOT, 'test', 'fixtures', 'files', 'analyze-session-S01.json'), 'utf8'));
    const { stdout: text } = await cli(['analyze', sample, '--format', 'text']);
    expect(text).toMatch(/^Session S01: 10 assessors, 5 products, 8 attributes$/m);
    expect(text).toMatch(/^ {2}sweetness: products F = [\d.]+ on 4 and \d+ df, p < 0\.001; variance shares assessor \d+ %, assessor × product \d+ %, replicate noise \d+ %$/m);
  });

  it('flags --format text lists the open cases with their sentences, act before watch', async () => {
    const { stdout } = await cli(['flags', '--panel', PANEL, '--db', store, '--format', 'text']);
    const json = JSON.parse((await cli(['flags', '--panel', PANEL, '--db', store, '--format', 'json'])).stdout) as { id: number; status: string; severity: string; message: string }[];
    const open = json.filter((f) => f.status === 'open');
    expect(open.length).toBeGreaterThan(0);
    for (const f of open) expect(stdout).toContain(`#${f.id} `);
    for (const f of json.filter((c) => c.status !== 'open')) expect(stdout).not.toContain(`#${f.id} `);
    if (open.some((f) => f.severity === 'act') && open.some((f) => f.severity === 'watch')) {
      expect(stdout.indexOf('To act on')).toBeLessThan(stdout.indexOf('To watch'));
    }
    expect(stdout).toMatch(/^\d+ open cases?;/m);
    expect(stdout).not.toMatch(/\b1 cases\b|\b1 open cases\b/);
    expect(stdout).toContain('evidence for review');
  }, 120_000);

  it('a reader that closes the pipe early ends the command quietly with exit code 0', async () => {
    const csv = join(dir, 'year.csv');
    writeFileSync(csv, toLongCsv(yearPanel()));
    const child = spawn(process.execPath, [BIN, 'analyze', csv, '--format', 'json'], { cwd: ROOT, stdio: ['ignore', 'pipe', 'pipe'] });
    let stderr = '';
    child.stderr.on('data', (chunk: Buffer) => (stderr += chunk.toString()));
    child.stdout.once('data', () => child.stdout.destroy()); // like `| head -c 1`
    const code = await new Promise<number | null>((done) => child.on('close', (c) => done(c)));
    expect(stderr).not.toMatch(/EPIPE/);
    expect(code).toBe(0);
  }, 120_000);

  it('report --out writes one self-contained HTML file; a bad session is a plain error', async () => {
    const out = join(dir, 'report.html');
    await cli(['report', '--panel', PANEL, '--db', store, '--from', 'S40', '--to', 'S52', '--out', out]);
    const html = readFileSync(out, 'utf8');
    expect(html).toContain('<style>');
    expect(html).not.toMatch(/<link[^>]+stylesheet/);
    const external = [...html.matchAll(/\b(?:src|href)="([^"]*)"/g)].map((m) => m[1]).filter((target) => !target.startsWith('#'));
    expect(external).toEqual([]);
    expect(html).not.toMatch(/url\((?!#)/); // no external url() in the inlined CSS
    const failure = await cli(['report', '--panel', PANEL, '--db', store, '--session', 'S99', '--out', join(dir, 'x.html')]).catch((error: { code: number; stderr: string }) => error);
    expect(failure).toMatchObject({ code: 2 });
    expect((failure as { stderr: string }).stderr).toContain('no session labelled "S99"');
  }, 120_000);
});
