/** The panel thresholds page: every threshold with its value, default and documentation/source. */
import { monitorCrumbs, monitorHref } from './monitor-common.js';
import { thresholdLabel } from './words.js';
import type { PageViewBase } from './page-common.js';

export interface ThresholdFieldInput {
  /** Dotted path, e.g. "level.actFraction" (also the form field name). */
  path: string;
  kind: 'number' | 'integer' | 'boolean';
  value: number | boolean;
  defaultValue: number | boolean;
  /** What it does and its source (or "common practice, no source"), from the schema. */
  description: string;
}

export interface ThresholdField extends ThresholdFieldInput {
  /** The threshold in plain words (the code name `path` is shown as secondary text). */
  label: string;
  group: string;
  name: string;
  isChanged: boolean;
  isBoolean: boolean;
  isChecked: boolean;
  step: string;
}

export interface SettingsView extends PageViewBase {
  panel: string;
  groups: { name: string; fields: ThresholdField[] }[];
  problems: { path: string; message: string }[];
  /** The current thresholds as a JSON file (what the upload accepts). */
  thresholdsJson: string;
  saved: boolean;
  formAction: string;
  jsonAction: string;
  apiHref: string;
}

export function buildSettingsView(input: {
  panel: string;
  fields: ThresholdFieldInput[];
  thresholds: unknown;
  problems: { path: string; message: string }[];
  saved: boolean;
}): SettingsView {
  const groups = new Map<string, ThresholdField[]>();
  for (const f of input.fields) {
    const dot = f.path.lastIndexOf('.');
    const group = dot === -1 ? 'general' : f.path.slice(0, dot);
    let list = groups.get(group);
    if (!list) groups.set(group, (list = []));
    list.push({
      ...f,
      label: thresholdLabel(f.path),
      group,
      name: dot === -1 ? f.path : f.path.slice(dot + 1),
      isChanged: f.value !== f.defaultValue,
      isBoolean: f.kind === 'boolean',
      isChecked: f.value === true,
      step: f.kind === 'integer' ? '1' : 'any',
    });
  }
  const base = monitorHref(input.panel, 'settings');
  return {
    title: `Thresholds: ${input.panel}`,
    breadcrumbs: monitorCrumbs(input.panel, 'Thresholds'),
    panel: input.panel,
    groups: [...groups].map(([name, fields]) => ({ name, fields })),
    problems: input.problems,
    thresholdsJson: JSON.stringify(input.thresholds, null, 2),
    saved: input.saved,
    formAction: base,
    jsonAction: `${base}/json`,
    apiHref: `/api/panels/${encodeURIComponent(input.panel)}/thresholds`,
  };
}
