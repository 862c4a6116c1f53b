import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { PanelConfigError, readPanelConfigFile, validatePanelConfig, withReferenceProducts } from '../../store/panel-config.js';
import { tempFolder } from './helpers.js';

const cleanups: (() => void)[] = [];
afterEach(() => cleanups.splice(0).forEach((f) => f()));

describe('panel settings file', () => {
  it('accepts scale, attributes, products and an unread thresholds block', () => {
    const { config, problems } = validatePanelConfig(
      {
        scale: { min: 0, max: 10 },
        attributes: { crunchiness: { min: 0, max: 15, anchorLow: 'soft', anchorHigh: 'very crunchy' } },
        products: { REF: { role: 'reference', name: 'House standard' } },
        thresholds: { anything: [1, 2] },
      },
      'panel.json',
    );
    expect(problems).toEqual([]);
    expect(config?.products?.REF.role).toBe('reference');
  });

  it('names the file and the JSON path of each problem', () => {
    const { config, problems } = validatePanelConfig(
      { scale: { min: 10, max: 0 }, attributes: { sweet: { min: 'low', max: 5 } }, products: { P1: { role: 'control' } }, colour: 'red' },
      'panel.json',
    );
    expect(config).toBeNull();
    const paths = problems.map((p) => p.path);
    expect(paths).toContain('/attributes/sweet/min');
    expect(paths).toContain('/products/P1/role');
    expect(paths).toContain('/colour');
    expect(problems.every((p) => p.file === 'panel.json')).toBe(true);
    expect(problems.find((p) => p.path === '/colour')?.message).toMatch(/unknown setting/);
    // the range check runs once the shape is right
    expect(validatePanelConfig({ scale: { min: 10, max: 0 } }, 'panel.json').problems).toEqual([
      { file: 'panel.json', path: '/scale', message: 'scale minimum (10) must be a number below the maximum (0)' },
    ]);
  });

  it('reads a file, reporting unreadable JSON without a path', async () => {
    const t = tempFolder('settings');
    cleanups.push(t.remove);
    const good = join(t.folder, 'good.json');
    writeFileSync(good, '\uFEFF{"scale": {"min": 1, "max": 9}}');
    expect(await readPanelConfigFile(good)).toEqual({ scale: { min: 1, max: 9 } });
    const bad = join(t.folder, 'bad.json');
    writeFileSync(bad, '{"scale": ');
    const error = await readPanelConfigFile(bad).catch((e: unknown) => e);
    expect(error).toBeInstanceOf(PanelConfigError);
    expect((error as Error).message).toMatch(/^bad\.json: \/: not valid JSON/);
    expect((error as Error).message).not.toContain(t.folder);
  });

  it('--reference marks products as the reference, keeping other settings', () => {
    expect(withReferenceProducts({ products: { P1: { role: 'test', name: 'Plain' } } }, ['P1', 'REF'])).toEqual({
      products: { P1: { role: 'reference', name: 'Plain' }, REF: { role: 'reference' } },
    });
    expect(withReferenceProducts(undefined, [])).toBeUndefined();
  });
});
