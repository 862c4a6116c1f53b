/** The thresholds of a panel: the settings page, and reading and checking new thresholds before they are saved. */
import { PanelThresholdsSchema, validateThresholds, type PanelThresholds } from '../analysis/flags/index.js';
import { buildSettingsView, type SettingsView, type ThresholdFieldInput } from '../report/monitor-settings-view.js';
import type { MonitorPanel } from './monitor-context.js';

export interface ThresholdProblem {
  path: string;
  message: string;
}

/** Every leaf of the thresholds schema with its value, default and description. */
function thresholdFields(thresholds: unknown, defaults: unknown): ThresholdFieldInput[] {
  const out: ThresholdFieldInput[] = [];
  const walk = (schema: { properties?: Record<string, unknown> }, value: unknown, fallback: unknown, prefix: string) => {
    for (const [key, child] of Object.entries(schema.properties ?? {})) {
      const node = child as { type?: string; description?: string; properties?: Record<string, unknown> };
      const path = prefix ? `${prefix}.${key}` : key;
      const v = (value as Record<string, unknown>)[key];
      const d = (fallback as Record<string, unknown>)[key];
      if (node.type === 'object') walk(node, v, d, path);
      else {
        out.push({
          path,
          kind: node.type === 'boolean' ? 'boolean' : node.type === 'integer' ? 'integer' : 'number',
          value: v as number | boolean,
          defaultValue: d as number | boolean,
          description: node.description ?? '',
        });
      }
    }
  };
  walk(PanelThresholdsSchema as { properties?: Record<string, unknown> }, thresholds, defaults, '');
  return out;
}

const currentFields = (ctx: MonitorPanel) => thresholdFields(ctx.thresholds, validateThresholds({}).thresholds);

/** The settings page; with problems, the thresholds still in force and what was wrong with the ones sent. */
export function buildSettingsPage(ctx: MonitorPanel, params: { saved: boolean; problems?: ThresholdProblem[] }): SettingsView {
  return buildSettingsView({ panel: ctx.panel.name, fields: currentFields(ctx), thresholds: ctx.thresholds, problems: params.problems ?? [], saved: params.saved });
}

/**
 * Form fields (dotted names, read through `field`, already trimmed) back into a thresholds
 * object; numbers parsed, booleans from "true".
 */
export function thresholdsFromForm(ctx: MonitorPanel, field: (name: string) => string): Record<string, unknown> {
  const out: Record<string, unknown> = {};
  for (const f of currentFields(ctx)) {
    const raw = field(f.path);
    const value = f.kind === 'boolean' ? raw === 'true' : raw === '' ? Number.NaN : Number(raw);
    const parts = f.path.split('.');
    let node = out;
    for (const part of parts.slice(0, -1)) node = (node[part] ??= {}) as Record<string, unknown>;
    node[parts[parts.length - 1]] = value;
  }
  return out;
}

/** Checks thresholds sent by a form or the API: the complete thresholds (defaults filled in) or what is wrong. */
export function checkThresholds(given: unknown): { thresholds: PanelThresholds; problems: ThresholdProblem[] } {
  return validateThresholds(given);
}
