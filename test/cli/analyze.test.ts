/**
 * `panel-steward analyze`: end to end from a CSV file to the analyze JSON contract. The assessor indices
 * are compared with plain R (test/fixtures/r/indices.R, seeded designs committed in the
 * fixture) at 1e-9; the fits must be exactly what fitSessionModel/fitPeriodModel return (their
 * own R checks live with the model tests), and in balanced sessions with every component inside
 * the parameter space the product F must equal the classical MS_P/MS_AP from R's lm() ANOVA.
 */
import { execFile } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { promisify } from 'node:util';
import { afterAll, describe, expect, it } from 'vitest';
import type { AnalyzeJson } from '../../domain/analysis.js';
import type { Observation } from '../../domain/ratings.js';
import { fitSessionModel } from '../../analysis/lmm/fit-session-model.js';
import { fitPeriodModel } from '../../analysis/lmm/fit-period-model.js';
import { runAnalyzeCommand } from '../../server/cli/analyze-command.js';
import { CliError } from '../../server/cli/cli-error.js';
import { expectCloseOrNull, expectPValueClose, readFixture, toObservations, type ColumnData } from '../analysis/indices/fixture-helpers.js';
import type { ExpectedSessionIndices } from '../analysis/indices/compare-indices.js';

interface DesignFixture extends ExpectedSessionIndices {
  name: string;
  data: ColumnData;
}
const designs = readFixture<{ designs: DesignFixture[] }>('indices-designs.json').designs;
const ATTRIBUTE = 'crispness';
const sessionOf = (index: number) => `S${String(index + 1).padStart(2, '0')}`;
const allObservations: Observation[] = designs.flatMap((design, index) => toObservations(design.data, sessionOf(index), ATTRIBUTE));

const folder = mkdtempSync(join(tmpdir(), 'analyze-test-'));
afterAll(() => rmSync(folder, { recursive: true, force: true }));

function writeLongCsv(name: string, observations: readonly Observation[], mapValue: (row: Observation) => string = (row) => String(row.value)): string {
  const lines = ['session,date,assessor,product,replicate,attribute,value'];
  for (const row of observations) lines.push([row.session, '2026-03-03', row.assessor, row.product, row.replicate, row.attribute, mapValue(row)].join(','));
  const path = join(folder, name);
  writeFileSync(path, `${lines.join('\n')}\n`);
  return path;
}

async function analyze(path: string, options: Parameters<typeof runAnalyzeCommand>[1] = {}) {
  let stdout = '';
  let stderr = '';
  const exitCode = await runAnalyzeCommand(path, options, { stdout: { write: (text: string) => (stdout += text) }, stderr: { write: (text: string) => (stderr += text) } });
  return { exitCode, stdout, stderr };
}

const roundTrip = <T>(value: T): T => JSON.parse(JSON.stringify(value)) as T;

describe('analyze FILE --format json (per session)', async () => {
  const path = writeLongCsv('designs-long.csv', allObservations);
  const result = await analyze(path, { format: 'json' });
  const json = JSON.parse(result.stdout) as AnalyzeJson;

  it('exits 0 and prints one JSON document with only the contract keys', () => {
    expect(result.exitCode).toBe(0);
    expect(Object.keys(json).sort()).toEqual(['assessorIndices', 'fits']);
    expect(result.stdout).not.toMatch(/NaN|Infinity/);
    for (const row of json.assessorIndices) {
      expect(Object.keys(row).sort()).toEqual(['agreementR', 'assessor', 'attribute', 'discriminationF', 'discriminationP', 'offset', 'repeatabilityMSE', 'scaling', 'session'].sort());
    }
  });

  it('has one fit per (session, attribute), identical to fitSessionModel', () => {
    expect(json.fits).toHaveLength(designs.length);
    designs.forEach((_, index) => {
      const session = sessionOf(index);
      const observations = allObservations.filter((row) => row.session === session);
      const fit = json.fits.find((entry) => entry.session === session)!;
      expect(fit.model).toBe('session');
      expect(fit.attribute).toBe(ATTRIBUTE);
      expect(fit).toEqual(roundTrip(fitSessionModel(observations).json));
    });
  });

  it('assessor indices equal plain R at 1e-9 (p-values: jstat accuracy, see fixture-helpers)', () => {
    designs.forEach((design, index) => {
      const session = sessionOf(index);
      for (const want of design.assessors) {
        const got = json.assessorIndices.find((row) => row.session === session && row.assessor === want.assessor)!;
        const where = `${design.name} ${want.assessor}`;
        expect(got.attribute).toBe(ATTRIBUTE);
        expectCloseOrNull(got.offset, want.offset, `${where} offset`);
        expectCloseOrNull(got.discriminationF, want.discriminationF, `${where} F`);
        expectPValueClose(got.discriminationP, want.discriminationP, `${where} p`);
        expectCloseOrNull(got.repeatabilityMSE, want.repeatabilityMSE, `${where} MSE`);
        expectCloseOrNull(got.agreementR, want.agreementR, `${where} r`);
        expectCloseOrNull(got.scaling, want.scaling, `${where} scaling`);
      }
      expect(json.assessorIndices.filter((row) => row.session === session)).toHaveLength(design.assessors.length);
    });
  });

  it('balanced sessions with all components positive: product F = MS_P/MS_AP of R lm() (methods §1.2)', () => {
    let checked = 0;
    designs.forEach((design, index) => {
      if (!design.anova) return;
      const fit = json.fits.find((entry) => entry.session === sessionOf(index))!;
      const components = [fit.variance.assessor, fit.variance['assessor:product'] ?? 1, fit.variance.residual];
      if (!components.every((value) => value > 1e-8)) return;
      const table = new Set(design.data.assessor).size;
      const nProducts = new Set(design.data.product).size;
      const msProduct = design.anova.productSumOfSquares / (nProducts - 1);
      const msInteraction = design.anova.interactionSumOfSquares / ((table - 1) * (nProducts - 1));
      expect(fit.productTest.F! / (msProduct / msInteraction)).toBeCloseTo(1, 8);
      expect(fit.productTest.denDf).toBeCloseTo((table - 1) * (nProducts - 1), 6);
      checked++;
    });
    expect(checked).toBeGreaterThan(0);
  });

  it('ids stay strings, even when they look like numbers with leading zeros', async () => {
    const rows = allObservations.filter((row) => row.session === 'S01').map((row) => ({ ...row, product: `0${row.product}`, assessor: row.assessor.replace('A', '') }));
    const out = await analyze(writeLongCsv('numeric-ids.csv', rows));
    const parsed = JSON.parse(out.stdout) as AnalyzeJson;
    for (const mean of parsed.fits[0].productMeans) expect(mean.product).toMatch(/^0\d+$/);
    for (const row of parsed.assessorIndices) expect(typeof row.assessor).toBe('string');
    expect(parsed.assessorIndices[0].assessor).toBe('01');
  });
});

describe('analyze a wide file', () => {
  it('gives the same JSON as the long form of the same ratings', async () => {
    const rows = allObservations.filter((row) => row.session === 'S02');
    const second = rows.map((row) => ({ ...row, attribute: 'hardness', value: Math.round((10 - row.value) * 10) / 10 }));
    const long = await analyze(writeLongCsv('two-attributes-long.csv', [...rows, ...second]));
    const lines = ['session,date,assessor,product,replicate,crispness,hardness'];
    rows.forEach((row, i) => lines.push([row.session, '2026-03-03', row.assessor, row.product, row.replicate, row.value, second[i].value].join(',')));
    const widePath = join(folder, 'two-attributes-wide.csv');
    writeFileSync(widePath, `${lines.join('\n')}\n`);
    const wide = await analyze(widePath);
    expect(wide.exitCode).toBe(0);
    const sortKey = (json: AnalyzeJson) => ({
      fits: [...json.fits].sort((a, b) => a.attribute.localeCompare(b.attribute)),
      assessorIndices: [...json.assessorIndices].sort((a, b) => `${a.attribute}/${a.assessor}`.localeCompare(`${b.attribute}/${b.assessor}`)),
    });
    expect(sortKey(JSON.parse(wide.stdout))).toEqual(sortKey(JSON.parse(long.stdout)));
    expect(JSON.parse(wide.stdout).fits).toHaveLength(2);
  });
});

describe('analyze FILE --period', () => {
  it('fits one period model per attribute, session null, and no assessor indices', async () => {
    // The balanced designs share assessors A01…: treat three of them as consecutive sessions.
    const rows = allObservations.filter((row) => ['S01', 'S03', 'S06'].includes(row.session));
    const out = await analyze(writeLongCsv('period.csv', rows), { period: true });
    expect(out.exitCode).toBe(0);
    const parsed = JSON.parse(out.stdout) as AnalyzeJson;
    expect(parsed.assessorIndices).toEqual([]);
    expect(parsed.fits).toHaveLength(1);
    const [fit] = parsed.fits;
    expect(fit.session).toBeNull();
    expect(fit.model).toBe('period');
    expect(Object.keys(fit.variance).sort()).toEqual(['assessor', 'assessor:product', 'assessor:session', 'product:session', 'residual', 'session']);
    expect(fit).toEqual(roundTrip(fitPeriodModel(rows).json));
  });
});

describe('analyze: files with problems and odd data', () => {
  it('lists every problem as file:row:column: message on stderr, prints nothing on stdout, exits 1', async () => {
    const rows = allObservations.filter((row) => row.session === 'S01');
    const path = writeLongCsv('bad.csv', rows, (row) => (row.assessor === 'A02' && row.product === rows[0].product && row.replicate === 1 ? 'five' : String(row.value)));
    const out = await analyze(path);
    expect(out.exitCode).toBe(1);
    expect(out.stdout).toBe('');
    expect(out.stderr).toMatch(/^bad\.csv:\d+:value: /m);
    expect(out.stderr).not.toMatch(/\/tmp|at .*\.ts/);
  });

  it('refuses two different values under the same keys, counts an exact repeat once', async () => {
    const rows = allObservations.filter((row) => row.session === 'S01');
    const conflicting = await analyze(writeLongCsv('conflict.csv', [...rows, { ...rows[0], value: rows[0].value + 1 }]));
    expect(conflicting.exitCode).toBe(1);
    expect(conflicting.stderr).toMatch(/two different values/);
    const repeated = await analyze(writeLongCsv('repeat.csv', [...rows, rows[0]]));
    expect(repeated.exitCode).toBe(0);
    expect(repeated.stderr).toMatch(/counted once/);
    expect(JSON.parse(repeated.stdout).fits[0].n).toBe(rows.length);
  });

  it('applies the import rule to sample codes: the same value under two codes is a conflict', async () => {
    const rows = allObservations.filter((row) => row.session === 'S01');
    const lines = ['session,date,assessor,product,replicate,attribute,value,code'];
    for (const row of rows) lines.push([row.session, '2026-03-03', row.assessor, row.product, row.replicate, row.attribute, row.value, `C${row.product}`].join(','));
    const first = rows[0];
    const withSecondCode = [...lines, [first.session, '2026-03-03', first.assessor, first.product, first.replicate, first.attribute, first.value, 'X999'].join(',')];
    const path = join(folder, 'two-codes.csv');
    writeFileSync(path, `${withSecondCode.join('\n')}\n`);
    const out = await analyze(path);
    expect(out.exitCode).toBe(1);
    expect(out.stderr).toMatch(/twice with sample codes C\S+ and X999/);
    const samePath = join(folder, 'same-code.csv');
    writeFileSync(samePath, `${[...lines, lines[1]].join('\n')}\n`);
    expect((await analyze(samePath)).exitCode).toBe(0);
  });

  it('a session that cannot be fitted gets a note on stderr; its indices are still printed', async () => {
    const rows = allObservations.filter((row) => row.session === 'S01').map((row) => ({ ...row, value: 5 }));
    const out = await analyze(writeLongCsv('constant.csv', rows));
    expect(out.exitCode).toBe(0);
    const parsed = JSON.parse(out.stdout) as AnalyzeJson;
    expect(parsed.fits).toEqual([]);
    expect(parsed.assessorIndices.length).toBeGreaterThan(0);
    expect(out.stderr).toMatch(/^note: session S01, attribute crispness: could not be fitted: /m);
    expect(parsed.notFitted).toEqual([
      { session: 'S01', attribute: 'crispness', model: 'session', status: 'not-fitted', code: 'constant-response', reason: expect.any(String) },
    ]);
  });

  it('an attribute whose replicates never differ is listed as not fitted; the other attributes and the file go on', async () => {
    // The zero-residual design of test/fixtures/r/lmm.R, where lmer gives no usable fit (lmm-zero-residual.json).
    const zero = readFixture<{ cases: { data: ColumnData & { replicate: number[] } }[] }>('lmm-zero-residual.json').cases[0].data;
    const flat = toObservations(zero, 'S01', 'sweetness');
    const rows = [...allObservations.filter((row) => row.session === 'S01'), ...flat];
    const out = await analyze(writeLongCsv('zero-residual.csv', rows));
    expect(out.exitCode, out.stderr).toBe(0);
    const parsed = JSON.parse(out.stdout) as AnalyzeJson;
    expect(parsed.fits.map((fit) => fit.attribute)).toEqual(['crispness']);
    expect(parsed.notFitted).toEqual([
      {
        session: 'S01',
        attribute: 'sweetness',
        model: 'session',
        status: 'not-fitted',
        code: 'no-residual-variation',
        reason: 'no replicate variation: every assessor gave identical ratings to each product',
      },
    ]);
    expect(out.stderr).toMatch(/^note: session S01, attribute sweetness: could not be fitted: no replicate variation: every assessor gave identical ratings to each product$/m);
    expect(parsed.assessorIndices.some((row) => row.attribute === 'sweetness')).toBe(true);
  });

  it('usage errors: missing file and unknown format are CliErrors with exit code 2', async () => {
    await expect(runAnalyzeCommand(join(folder, 'absent.csv'), {})).rejects.toThrow(CliError);
    await expect(runAnalyzeCommand(join(folder, 'absent.csv'), {})).rejects.toMatchObject({ exitCode: 2, message: 'absent.csv: no such file.' });
    const path = writeLongCsv('ok.csv', allObservations.filter((row) => row.session === 'S01'));
    await expect(runAnalyzeCommand(path, { format: 'yaml' })).rejects.toMatchObject({ exitCode: 2 });
  });
});

describe('analyze the sample files', () => {
  const sampleDir = join(import.meta.dirname, '..', '..', 'sample-data');
  it('reads the long CSV and the wide XLSX sample sessions', async () => {
    for (const name of ['session-S01-long.csv', 'session-S02-wide.xlsx']) {
      const out = await analyze(join(sampleDir, name));
      expect(out.exitCode, `${name}: ${out.stderr}`).toBe(0);
      const parsed = JSON.parse(out.stdout) as AnalyzeJson;
      expect(parsed.fits.length).toBeGreaterThan(1);
      expect(new Set(parsed.fits.map((fit) => fit.session)).size).toBe(1);
      expect(parsed.assessorIndices.length).toBe(parsed.fits.length * parsed.fits[0].assessors);
    }
  });

  it('a worksheet that does not exist is a problem, exit 1', async () => {
    const out = await analyze(join(sampleDir, 'session-S02-wide.xlsx'), { sheet: 'no such sheet' });
    expect(out.exitCode).toBe(1);
    expect(out.stderr).toMatch(/^session-S02-wide\.xlsx.*: /m);
    expect(out.stdout).toBe('');
  });
});

describe('analyze through the real command line', () => {
  it('is registered in panel-steward and prints the same JSON', async () => {
    const rows = allObservations.filter((row) => row.session === 'S01');
    const path = writeLongCsv('cli.csv', rows);
    const { stdout } = await promisify(execFile)(process.execPath, ['--import', 'tsx', 'server/cli/main.ts', 'analyze', path, '--format', 'json'], { cwd: join(import.meta.dirname, '..', '..') });
    const parsed = JSON.parse(stdout) as AnalyzeJson;
    expect(parsed.fits[0]).toEqual(roundTrip(fitSessionModel(rows).json));
  }, 30_000);
});
