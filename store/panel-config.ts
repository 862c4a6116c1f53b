import { readFile } from 'node:fs/promises';
import { basename } from 'node:path';
import { Type, type Static } from '@sinclair/typebox';
import { Value } from '@sinclair/typebox/value';
import type { ScaleRange } from '../domain/ratings.js';

/**
 * The panel settings file (`--settings panel.json`): default scale for new attributes,
 * per-attribute scales and anchor words, and product roles. The `thresholds` key belongs to
 * the flag rules and is accepted here without being read.
 */
const ScaleSchema = Type.Object({ min: Type.Number(), max: Type.Number() }, { additionalProperties: false });

const AttributeSettingsSchema = Type.Object(
  {
    min: Type.Number(),
    max: Type.Number(),
    anchorLow: Type.Optional(Type.String({ maxLength: 200 })),
    anchorHigh: Type.Optional(Type.String({ maxLength: 200 })),
  },
  { additionalProperties: false },
);

const ProductSettingsSchema = Type.Object(
  {
    role: Type.Union([Type.Literal('test'), Type.Literal('reference')]),
    name: Type.Optional(Type.String({ maxLength: 200 })),
  },
  { additionalProperties: false },
);

export const PanelConfigSchema = Type.Object(
  {
    scale: Type.Optional(ScaleSchema),
    attributes: Type.Optional(Type.Record(Type.String({ minLength: 1 }), AttributeSettingsSchema)),
    products: Type.Optional(Type.Record(Type.String({ minLength: 1 }), ProductSettingsSchema)),
    thresholds: Type.Optional(Type.Unknown()),
  },
  { additionalProperties: false },
);

export type PanelConfigFile = Static<typeof PanelConfigSchema>;
export type AttributeSettings = Static<typeof AttributeSettingsSchema>;
export type ProductSettings = Static<typeof ProductSettingsSchema>;

/** One thing wrong with a settings file, located by its JSON path (e.g. `/attributes/sweet/min`). */
export interface PanelConfigProblem {
  file: string;
  path: string;
  message: string;
}

export class PanelConfigError extends Error {
  constructor(readonly problems: PanelConfigProblem[]) {
    super(problems.map(formatPanelConfigProblem).join('\n'));
    this.name = 'PanelConfigError';
  }
}

export function formatPanelConfigProblem(problem: PanelConfigProblem): string {
  return `${problem.file}: ${problem.path || '/'}: ${problem.message}`;
}

/** Checks a parsed settings object; `fileName` is only used to name the file in problems. */
export function validatePanelConfig(value: unknown, fileName: string): { config: PanelConfigFile | null; problems: PanelConfigProblem[] } {
  const problems: PanelConfigProblem[] = [];
  for (const error of Value.Errors(PanelConfigSchema, value)) {
    problems.push({ file: fileName, path: error.path, message: describeSchemaError(error.path, error.message) });
    if (problems.length >= 100) break;
  }
  if (problems.length > 0) return { config: null, problems };
  const config = value as PanelConfigFile;
  const checkRange = (path: string, range: ScaleRange): void => {
    if (!Number.isFinite(range.min) || !Number.isFinite(range.max) || range.min >= range.max) {
      problems.push({ file: fileName, path, message: `scale minimum (${range.min}) must be a number below the maximum (${range.max})` });
    }
  };
  if (config.scale) checkRange('/scale', config.scale);
  for (const [name, attribute] of Object.entries(config.attributes ?? {})) checkRange(`/attributes/${escapePointer(name)}`, attribute);
  return problems.length > 0 ? { config: null, problems } : { config, problems };
}

function describeSchemaError(path: string, message: string): string {
  if (message === 'Unexpected property') {
    return path.split('/').length === 2
      ? 'unknown setting; allowed are scale, attributes, products and thresholds'
      : 'unknown setting at this place';
  }
  return message.charAt(0).toLowerCase() + message.slice(1);
}

function escapePointer(key: string): string {
  return key.replace(/~/g, '~0').replace(/\//g, '~1');
}

/** Reads and validates a settings file; throws PanelConfigError naming the file (base name only). */
export async function readPanelConfigFile(path: string): Promise<PanelConfigFile> {
  const fileName = basename(path);
  let text: string;
  try {
    text = await readFile(path, 'utf8');
  } catch {
    throw new PanelConfigError([{ file: fileName, path: '', message: 'the settings file cannot be read; check its name' }]);
  }
  let parsed: unknown;
  try {
    parsed = JSON.parse(text.replace(/^\uFEFF/, ''));
  } catch (error) {
    const detail = error instanceof SyntaxError ? error.message : 'invalid JSON';
    throw new PanelConfigError([{ file: fileName, path: '', message: `not valid JSON (${detail})` }]);
  }
  const { config, problems } = validatePanelConfig(parsed, fileName);
  if (!config) throw new PanelConfigError(problems);
  return config;
}

/** Adds `role: 'reference'` for each code (the CLI's repeatable `--reference CODE`). */
export function withReferenceProducts(config: PanelConfigFile | undefined, referenceCodes: readonly string[]): PanelConfigFile | undefined {
  if (referenceCodes.length === 0) return config;
  const products: Record<string, ProductSettings> = { ...(config?.products ?? {}) };
  for (const code of referenceCodes) products[code] = { ...products[code], role: 'reference' };
  return { ...(config ?? {}), products };
}
