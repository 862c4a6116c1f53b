/**
 * Import findings (duplicate rows, decimal shifts, out-of-scale values from quarantine, missing
 * cells) become flags, so data problems are reviewed with the rest. Findings of one kind for one assessor in one session are
 * grouped into one flag listing the rows, so a bad file does not bury the list.
 * Severities follow methods §5: out-of-scale and out-of-scale decimal shift (5.2, 5.3a) and
 * conflicting duplicates (5.4) are act; exact duplicates and incomplete sessions are watch.
 */
import type { Flag, FlagKind, FlagSeverity } from '../../domain/flags.js';
import type { ImportFinding } from '../monitor/series.js';
import type { FlagContext } from './context.js';

const MAPPING: Record<string, { kind: FlagKind; severity: FlagSeverity; what: string } | undefined> = {
  'duplicate-row': { kind: 'duplicate', severity: 'watch', what: 'a row repeated with the same value' },
  'conflicting-duplicate': { kind: 'duplicate', severity: 'act', what: 'a row repeated with different values' },
  'decimal-shift': { kind: 'decimal-shift', severity: 'act', what: 'a value that looks like a misplaced decimal point' },
  'out-of-scale': { kind: 'out-of-scale', severity: 'act', what: 'a value outside the scale' },
  'missing-cells': { kind: 'missing-cells', severity: 'watch', what: 'gaps where products, attributes or replicates were not rated' },
};

export function findingFlags(ctx: FlagContext): Flag[] {
  const latest = ctx.history.sessions[ctx.history.sessions.length - 1]?.label ?? '';
  const groups = new Map<string, { kind: FlagKind; severity: FlagSeverity; what: string; session: string; assessor: string | null; items: ImportFinding[] }>();
  for (const finding of ctx.history.importFindings) {
    const mapped = MAPPING[finding.code];
    if (!mapped) continue;
    const session = finding.session ?? latest;
    const assessor = finding.assessor ?? null;
    const key = `${mapped.kind}\u0000${mapped.severity}\u0000${session}\u0000${assessor ?? ''}`;
    let group = groups.get(key);
    if (!group) groups.set(key, (group = { ...mapped, session, assessor, items: [] }));
    group.items.push(finding);
  }
  const out: Flag[] = [];
  for (const group of groups.values()) {
    const products = unique(group.items.map((f) => f.product ?? null));
    const attributes = unique(group.items.map((f) => f.attribute ?? null));
    const rows = group.items.map((f) => f.row).filter((r): r is number => r !== null);
    const files = unique(group.items.map((f) => f.file));
    const who = group.assessor ? `${group.assessor}'s ratings` : 'the file';
    const where = rows.length > 0 ? ` (spreadsheet row${rows.length > 1 ? 's' : ''} ${rows.slice(0, 5).join(', ')}${rows.length > 5 ? ', …' : ''})` : '';
    const count = group.items.length;
    out.push({
      kind: group.kind,
      assessor: group.assessor,
      product: products.length === 1 ? products[0] : null,
      attribute: attributes.length === 1 ? attributes[0] : null,
      firstSession: group.session,
      severity: group.severity,
      evidence: {
        test: 'import check (methods §5)',
        statistic: null,
        pValue: null,
        qValue: null,
        n: count,
        threshold: group.kind === 'out-of-scale' || group.kind === 'decimal-shift' ? 'value outside the scale end points' : group.kind === 'duplicate' ? 'same session, assessor, product, replicate and attribute twice' : 'completeness below the import check level',
        lastSession: group.session,
        rows,
        files,
        findings: group.items.slice(0, 20).map((f) => ({ code: f.code, row: f.row, column: f.column, message: f.message })),
      },
      message: `In session ${group.session}, ${who} contained ${count === 1 ? group.what : `${count} findings of ${group.what}`}${where}.`,
    });
  }
  return out;
}

function unique<T>(values: T[]): T[] {
  return [...new Set(values)];
}
