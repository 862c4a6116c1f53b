/**
 * The session report and the range report: what the stored models say per attribute, the
 * assessors' indices with open cases marked, the data findings, and (session report) what
 * differs from the previous session. One view feeds the page, its JSON twin, its CSV twins and
 * the self-contained file of `panel-steward report`.
 */
import { sessionLine, type SmallChart } from './charts/small-charts.js';
import { HOME_CRUMB, panelHref, sessionHref, type PageViewBase } from './page-common.js';
import {
  REPORT_CAUTIONS,
  buildAttributeSummary,
  buildFindings,
  buildIndexTables,
  feedbackHref,
  varianceShares,
  type AttributeSummaryView,
  type FindingInput,
  type FindingView,
  type IndexTableView,
  type OpenCaseInput,
  type ReportAttributeScale,
  type ReportSessionInput,
} from './report-common.js';
import { counted, dfText, fixed, localStamp, pText, signed } from './report-format.js';

export interface ReportHeader extends PageViewBase {
  panel: string;
  /** "session" or "range". */
  reportKind: 'session' | 'range';
  /** Words for the period covered, printed on every page. */
  period: string;
  generatedAt: string;
  generatedAtIso: string;
  cautions: string[];
  /** true in the file written by `panel-steward report`: no links to the service. */
  isStandaloneFile: boolean;
  fitNotice: string | null;
}

export interface ReportLinks {
  sessionHref: string;
  jsonHref: string;
  csvAttributesHref: string;
  csvIndicesHref: string;
  csvMeansHref: string;
}

export interface SessionChangesView {
  previousSession: string | null;
  sentence: string;
  assessorsAbsent: string[];
  assessorsNew: string[];
  movedMeans: { attribute: string; product: string; previousMean: number; mean: number; change: number; bound: number; changeText: string; boundText: string }[];
  shareChanges: { attribute: string; component: string; previousPercent: number; percent: number; changeText: string }[];
  reliabilityChanges: { attribute: string; previous: number; current: number; text: string }[];
}

export interface SessionReportView extends ReportHeader {
  session: string;
  date: string;
  links: ReportLinks | null;
  summary: string;
  attributes: AttributeSummaryView[];
  indexTables: IndexTableView[];
  openCaseSentence: string;
  findings: FindingView[];
  findingsSentence: string;
  changes: SessionChangesView;
  assessorSheets: { assessor: string; href: string }[];
}

/** What both reports are built from besides their sessions. */
interface ReportInputBase {
  panel: string;
  attributes: ReportAttributeScale[];
  referenceProducts: string[];
  openCases: OpenCaseInput[];
  findings: FindingInput[];
  generatedAt: Date;
  isStandaloneFile: boolean;
}

export interface SessionReportInput extends ReportInputBase {
  session: ReportSessionInput;
  previous: ReportSessionInput | null;
}

function reportCrumbs(panel: string, last: string, session?: string): PageViewBase['breadcrumbs'] {
  const crumbs = [HOME_CRUMB, { label: panel, href: panelHref(panel) }];
  if (session !== undefined) crumbs.push({ label: session, href: sessionHref(panel, session) });
  crumbs.push({ label: last, href: null });
  return crumbs;
}

function fitNotice(sessions: readonly ReportSessionInput[]): string | null {
  const never = sessions.filter((s) => s.fittedDataVersion === null).map((s) => s.label);
  const stale = sessions.filter((s) => s.fittedDataVersion !== null && s.fittedDataVersion !== s.dataVersion).map((s) => s.label);
  const parts: string[] = [];
  if (never.length > 0) parts.push(`${counted(never.length, 'session')} (${never.slice(0, 5).join(', ')}${never.length > 5 ? ', …' : ''}) ${never.length === 1 ? 'has' : 'have'} no stored models yet`);
  if (stale.length > 0) parts.push(`${counted(stale.length, 'session')} changed since ${stale.length === 1 ? 'its' : 'their'} models were computed`);
  return parts.length === 0 ? null : `${parts.join('; ')}: run a refit (monitor page or \`panel-steward refit\`) for current numbers.`;
}

function attributeViews(session: ReportSessionInput, scales: readonly ReportAttributeScale[], references: ReadonlySet<string>, withCharts = true): AttributeSummaryView[] {
  const scaleOf = new Map(scales.map((s) => [s.name, s]));
  return [...session.attributes]
    .sort((a, b) => (a.attribute < b.attribute ? -1 : a.attribute > b.attribute ? 1 : 0))
    .map((a) => buildAttributeSummary(a, scaleOf.get(a.attribute), references, { withCharts }));
}

function presentAssessors(session: ReportSessionInput): Set<string> {
  return new Set(session.attributes.flatMap((a) => a.indices.map((row) => row.assessor)));
}

/** Differences that matter from the previous session: presence, product means beyond 2 SE of the difference, variance shares, reliability. */
export function sessionChanges(current: ReportSessionInput, previous: ReportSessionInput | null): SessionChangesView {
  const empty: SessionChangesView = { previousSession: null, sentence: 'This is the first session of the panel: nothing to compare with.', assessorsAbsent: [], assessorsNew: [], movedMeans: [], shareChanges: [], reliabilityChanges: [] };
  if (previous === null) return empty;
  const now = presentAssessors(current);
  const before = presentAssessors(previous);
  const assessorsAbsent = [...before].filter((a) => !now.has(a)).sort();
  const assessorsNew = [...now].filter((a) => !before.has(a)).sort();
  const movedMeans: SessionChangesView['movedMeans'] = [];
  const shareChanges: SessionChangesView['shareChanges'] = [];
  const reliabilityChanges: SessionChangesView['reliabilityChanges'] = [];
  const previousOf = new Map(previous.attributes.map((a) => [a.attribute, a]));
  for (const a of [...current.attributes].sort((x, y) => (x.attribute < y.attribute ? -1 : 1))) {
    const p = previousOf.get(a.attribute);
    if (!a.fit || !p?.fit) continue;
    const previousMeans = new Map(p.fit.productMeans.map((m) => [m.product, m]));
    for (const m of a.fit.productMeans) {
      const old = previousMeans.get(m.product);
      if (!old) continue;
      // Two standard errors of the difference of two independent means.
      const bound = 2 * Math.sqrt(m.se ** 2 + old.se ** 2);
      const change = m.mean - old.mean;
      if (Math.abs(change) > bound) {
        movedMeans.push({ attribute: a.attribute, product: m.product, previousMean: old.mean, mean: m.mean, change, bound, changeText: signed(change, 2), boundText: fixed(bound, 2) });
      }
    }
    const nowShares = new Map(varianceShares(a.fit).map((s) => [s.key, s]));
    for (const s of varianceShares(p.fit)) {
      const n = nowShares.get(s.key);
      if (n && Math.abs(n.sharePercent - s.sharePercent) >= 15) {
        shareChanges.push({ attribute: a.attribute, component: n.label, previousPercent: s.sharePercent, percent: n.sharePercent, changeText: `${s.sharePercent.toFixed(0)} % → ${n.sharePercent.toFixed(0)} %` });
      }
    }
    const r0 = p.reliability?.relativeCoefficient ?? null;
    const r1 = a.reliability?.relativeCoefficient ?? null;
    if (r0 !== null && r1 !== null && Math.abs(r1 - r0) >= 0.1) {
      reliabilityChanges.push({ attribute: a.attribute, previous: r0, current: r1, text: `${fixed(r0, 2)} → ${fixed(r1, 2)}` });
    }
  }
  const parts: string[] = [];
  parts.push(movedMeans.length === 0 ? 'no product mean moved beyond twice the standard error of the change' : `${counted(movedMeans.length, 'product mean')} moved beyond twice the standard error of the change`);
  if (assessorsAbsent.length > 0) parts.push(`${counted(assessorsAbsent.length, 'assessor')} of the previous session ${assessorsAbsent.length === 1 ? 'is' : 'are'} absent`);
  if (assessorsNew.length > 0) parts.push(`${counted(assessorsNew.length, 'assessor')} ${assessorsNew.length === 1 ? 'is' : 'are'} new`);
  if (shareChanges.length > 0) parts.push(`${counted(shareChanges.length, 'variance share')} changed by 15 points or more`);
  if (reliabilityChanges.length > 0) parts.push(`reliability changed by 0.1 or more on ${counted(reliabilityChanges.length, 'attribute')}`);
  const sentence = `Compared with session ${previous.label} (${previous.date}): ${parts.join('; ')}.`;
  return { previousSession: previous.label, sentence, assessorsAbsent, assessorsNew, movedMeans, shareChanges, reliabilityChanges };
}

function openCaseSentence(cases: readonly OpenCaseInput[], assessors: ReadonlySet<string>): string {
  const relevant = cases.filter((c) => c.assessor !== null && assessors.has(c.assessor));
  if (relevant.length === 0) return 'No open case concerns the assessors of this report. (That is not proof of good performance.)';
  const act = relevant.filter((c) => c.severity === 'act').length;
  return `${counted(relevant.length, 'open case')} (${act} to act on) concern these assessors; a mark ◆ shows where, and the case’s sentence appears when you point at it. Cases are evidence for review, not judgements.`;
}

function findingsSentence(findings: readonly FindingView[]): string {
  if (findings.length === 0) return 'The import noted nothing about these data and no cell is held for correction.';
  const held = findings.filter((f) => f.isHeld).length;
  return `${counted(findings.length, 'note')} from the import${held > 0 ? `, ${held} of them ${held === 1 ? 'a cell' : 'cells'} held for correction (not in the numbers above until corrected)` : ''}. These concern data entry, not how anyone rates.`;
}

function header(input: { panel: string; generatedAt: Date; isStandaloneFile: boolean }, kind: 'session' | 'range', title: string, period: string, crumbs: PageViewBase['breadcrumbs'], notice: string | null): ReportHeader {
  return {
    title,
    breadcrumbs: crumbs,
    panel: input.panel,
    reportKind: kind,
    period,
    generatedAt: localStamp(input.generatedAt),
    generatedAtIso: input.generatedAt.toISOString(),
    cautions: [...REPORT_CAUTIONS],
    isStandaloneFile: input.isStandaloneFile,
    fitNotice: notice,
  };
}

export function buildSessionReportView(input: SessionReportInput): SessionReportView {
  const { session } = input;
  const references = new Set(input.referenceProducts);
  const attributes = attributeViews(session, input.attributes, references);
  const attributeNames = attributes.map((a) => a.attribute);
  const findings = buildFindings(input.findings);
  const assessors = presentAssessors(session);
  const fitted = attributes.filter((a) => a.isFitted);
  const separated = fitted.filter((a) => a.productTest?.p !== null && (a.productTest?.p ?? 1) < 0.05).length;
  const summary =
    fitted.length === 0
      ? 'No stored models for this session yet.'
      : `${counted(assessors.size, 'assessor')} rated ${counted(Math.max(...fitted.map((a) => a.nProducts)), 'product')} on ${counted(attributes.length, 'attribute')}; the panel separated the products on ${separated} of ${counted(fitted.length, 'fitted attribute')}.`;
  const base = sessionHref(input.panel, session.label);
  const reportPath = `${base}/report`;
  return {
    ...header(input, 'session', `Session report ${session.label}`, `Session ${session.label}, ${session.date}`, reportCrumbs(input.panel, 'Report', session.label), fitNotice([session])),
    session: session.label,
    date: session.date,
    links: input.isStandaloneFile
      ? null
      : {
          sessionHref: base,
          jsonHref: `${reportPath}.json`,
          csvAttributesHref: `${reportPath}.csv`,
          csvIndicesHref: `${reportPath}.csv?table=indices`,
          csvMeansHref: `${reportPath}.csv?table=means`,
        },
    summary,
    attributes,
    indexTables: buildIndexTables([session], attributeNames, input.openCases),
    openCaseSentence: openCaseSentence(input.openCases, assessors),
    findings,
    findingsSentence: findingsSentence(findings),
    changes: sessionChanges(session, input.previous),
    assessorSheets: input.isStandaloneFile ? [] : [...assessors].sort().map((a) => ({ assessor: a, href: feedbackHref(input.panel, a, `?session=${encodeURIComponent(session.label)}`) })),
  };
}

/** One attribute over the sessions of a range: a row per session and the reliability chart. */
export interface RangeAttributeView {
  attribute: string;
  anchor: string;
  sentence: string;
  rows: {
    session: string;
    date: string;
    isFitted: boolean;
    fText: string;
    dfText: string;
    pText: string;
    isSatterthwaite: boolean;
    shares: string[];
    reliabilityText: string;
  }[];
  shareLabels: string[];
  reliabilityChart: SmallChart;
}

export interface RangeReportView extends ReportHeader {
  from: string;
  to: string;
  nSessions: number;
  summary: string;
  links: { jsonHref: string; csvAttributesHref: string; csvIndicesHref: string } | null;
  attributes: RangeAttributeView[];
  indexTables: IndexTableView[];
  openCaseSentence: string;
  findings: FindingView[];
  findingsSentence: string;
}

export interface RangeReportInput extends ReportInputBase {
  sessions: ReportSessionInput[];
}

export function buildRangeReportView(input: RangeReportInput): RangeReportView {
  const { sessions } = input;
  const first = sessions[0];
  const last = sessions[sessions.length - 1];
  const references = new Set(input.referenceProducts);
  const perSession = sessions.map((s) => ({ session: s, views: new Map(attributeViews(s, input.attributes, references, false).map((v) => [v.attribute, v])) }));
  const names = [...new Set(sessions.flatMap((s) => s.attributes.map((a) => a.attribute)))].sort();
  const shareLabels = ['Assessors', 'Assessor × product', 'Replicate noise'];
  const attributes: RangeAttributeView[] = names.map((attribute) => {
    const rows = perSession.map(({ session, views }) => {
      const v = views.get(attribute);
      const shareOf = (key: string) => v?.varianceShares.find((s) => s.key === key)?.shareText ?? '—';
      return {
        session: session.label,
        date: session.date,
        isFitted: v?.isFitted ?? false,
        fText: v?.productTest?.fText ?? '—',
        dfText: v?.productTest?.dfText ?? '—',
        pText: v?.productTest?.pText ?? '—',
        isSatterthwaite: v?.productTest?.isSatterthwaite ?? false,
        shares: [shareOf('assessor'), shareOf('assessor:product'), shareOf('residual')],
        reliabilityText: fixed(v?.reliabilityRelative ?? null, 2),
      };
    });
    const tests = perSession.map(({ views }) => views.get(attribute)?.productTest?.p ?? null).filter((p): p is number => p !== null);
    const separated = tests.filter((p) => p < 0.05).length;
    const reliabilities = perSession.map(({ session, views }) => ({ label: session.label, value: views.get(attribute)?.reliabilityRelative ?? null }));
    const known = reliabilities.map((r) => r.value).filter((v): v is number => v !== null).sort((a, b) => a - b);
    const median = known.length === 0 ? null : known[known.length >> 1];
    return {
      attribute,
      anchor: `range-${attribute.replace(/[^A-Za-z0-9_-]/g, '_')}`,
      sentence: `The panel separated the products in ${separated} of ${counted(tests.length, 'fitted session')}; the typical reliability of the product means was ${fixed(median, 2)}.`,
      rows,
      shareLabels,
      reliabilityChart: sessionLine(reliabilities, {
        title: `${attribute}: reliability of product means per session`,
        description: reliabilities.map((r) => `${r.label} ${fixed(r.value, 2)}`).join('; '),
        axisLabel: 'session (reliability: 1 = the panel would rank the products the same again)',
        yDomain: [0, 1],
      }),
    };
  });
  const assessors = new Set(sessions.flatMap((s) => [...presentAssessors(s)]));
  const findings = buildFindings(input.findings);
  const reportPath = `${panelHref(input.panel)}/report`;
  const query = `?from=${encodeURIComponent(first.label)}&to=${encodeURIComponent(last.label)}`;
  return {
    ...header(
      input,
      'range',
      `Panel report ${first.label} to ${last.label}`,
      `Sessions ${first.label} (${first.date}) to ${last.label} (${last.date}), ${counted(sessions.length, 'session')}`,
      reportCrumbs(input.panel, `Report ${first.label}–${last.label}`),
      fitNotice(sessions),
    ),
    from: first.label,
    to: last.label,
    nSessions: sessions.length,
    summary: `${counted(sessions.length, 'session')}, ${counted(assessors.size, 'assessor')}, ${counted(names.length, 'attribute')}. Index tables show each assessor’s mean over the period (median for discrimination F).`,
    links: input.isStandaloneFile ? null : { jsonHref: `${reportPath}.json${query}`, csvAttributesHref: `${reportPath}.csv${query}`, csvIndicesHref: `${reportPath}.csv${query}&table=indices` },
    attributes,
    indexTables: buildIndexTables(sessions, names, input.openCases),
    openCaseSentence: openCaseSentence(input.openCases, assessors),
    findings,
    findingsSentence: findingsSentence(findings),
  };
}

export { dfText, pText };
