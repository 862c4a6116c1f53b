/**
 * Which case each signal drawn on a chart belongs to (docs/methods.md §3.11). A signal that a flag
 * rule reads (chart-signals.ts) belongs to that rule's case for the chart's
 * assessor: the attribute's own case, or the assessor-wide case that summarises the attribute
 * charts (the drift rule reports one or the other), from the case's first session (its change
 * estimate or its signal, whichever is earlier) on. Any other signal of a level chart inside such a
 * case (a value beyond ±3σ, the CUSUM that dated it) is part of that case too, and a single value
 * beyond ±3σ belongs to a jump case of that session when its attribute is among those that jumped.
 * A product step chart's signals belong to the unstable-product case of its product and attribute
 * in the same way. Outside a case such signals keep their reason. A read signal with no such
 * case is reported as 'no-open-case': on the pages that means a reviewed case or flags older than
 * the data; with freshly built flags it means the charts and the flags disagree.
 */
import type { Flag } from '../../domain/flags.js';
import type { DesignedSignal, SignalReason } from './chart-signals.js';

export interface ChartOwner {
  assessor: string | null;
  /** The chart's attribute, or null for the summary over attributes. */
  attribute: string | null;
  /** A product step chart's product (its cases are the unstable-product cases of that product and attribute). */
  product?: string;
}

export type LinkedSignal = DesignedSignal & { link: { flag: Flag } | { reason: SignalReason | 'no-open-case' } };

function firstCovered(flag: Flag, order: ReadonlyMap<string, number>): number {
  const candidates = [flag.firstSession, flag.evidence.signalSession, flag.evidence.ewmaSignalSession].filter((s): s is string => typeof s === 'string');
  return Math.min(...candidates.map((s) => order.get(s) ?? Infinity));
}

export function linkSignals(signals: readonly DesignedSignal[], flags: readonly Flag[], owner: ChartOwner, sessions: readonly string[]): LinkedSignal[] {
  const order = new Map(sessions.map((s, i) => [s, i]));
  const own =
    owner.product !== undefined
      ? flags.filter((f) => f.kind === 'unstable-product' && f.product === owner.product && f.attribute === owner.attribute)
      : flags.filter((f) => f.kind === 'drift' && f.assessor !== null && f.assessor === owner.assessor);
  const wide = own.filter((f) => f.attribute === null);
  const covering = (at: number) => own.find((f) => (f.attribute === owner.attribute || f.attribute === null) && at >= firstCovered(f, order));
  return signals.map((signal) => {
    const at = order.get(signal.session) ?? -1;
    // A watch-level crossing before the case's first session is the same excursion building up:
    // it belongs to the chart's case too (the case rule reads the whole current segment).
    const chartCase = (f: Flag) => signal.severity === 'watch' || at >= firstCovered(f, order);
    if (signal.flagKind === 'unstable-product') {
      const flag = own.find(chartCase);
      return { ...signal, link: flag ? { flag } : { reason: 'no-open-case' as const } };
    }
    if (signal.flagKind === 'drift') {
      // The assessor-wide case summarises the attribute charts (no attribute case is raised beside it).
      const flag = (owner.attribute !== null ? wide[0] : undefined) ?? own.find((f) => f.attribute === owner.attribute && chartCase(f));
      return { ...signal, link: flag ? { flag } : { reason: 'no-open-case' as const } };
    }
    const inside = signal.reason === 'single-value' || signal.reason === 'single-product-value' || signal.reason === 'cusum-dates-change' ? covering(at) : undefined;
    if (inside) return { ...signal, link: { flag: inside } };
    if (signal.reason === 'single-value') {
      const jump = wide.find(
        (f) => f.evidence.pattern === 'jump' && f.firstSession === signal.session && (owner.attribute === null || (Array.isArray(f.evidence.attributesJumped) && f.evidence.attributesJumped.includes(owner.attribute))),
      );
      if (jump) return { ...signal, link: { flag: jump } };
    }
    return { ...signal, link: { reason: signal.reason ?? 'no-open-case' } };
  });
}
