/**
 * Wires the reports: reads what the last refit stored (no model is fitted here), adds the
 * reliability of the product means from the stored fits, and hands everything to the pure view
 * builders in report/. Used by the report pages and by `panel-steward report`.
 */
import type { Database } from 'better-sqlite3';
import { productMeanReliability } from '../../analysis/reliability/product-mean-reliability.js';
import { buildAssessorFeedbackView, type AssessorFeedbackView } from '../../report/assessor-feedback-view.js';
import type { FindingInput, OpenCaseInput, ReportAttributeScale, ReportSessionInput } from '../../report/report-common.js';
import { buildRangeReportView, buildSessionReportView, type RangeReportView, type SessionReportView } from '../../report/session-report-view.js';
import { findPanel, loadHeldFindings, loadImportFindings } from '../../store/fits-sessions.js';
import { listFlags } from '../../store/monitor-flags.js';
import { readPanelAttributes } from '../../store/read-panels.js';
import {
  hasAssessor,
  listProductRoles,
  listReportSessions,
  loadAssessorRatings,
  loadSessionAnalyses,
  type ReportSessionRow,
} from '../../store/read-report.js';
import { AppError } from '../errors.js';

export interface ReportOptions {
  generatedAt?: Date;
  isStandaloneFile?: boolean;
}

function requirePanelId(db: Database, panel: string): number {
  const row = findPanel(db, panel);
  if (!row) throw new AppError('PANEL_NOT_FOUND', { panel: panel.slice(0, 200) });
  return row.id;
}

function sessionIndex(panel: string, sessions: readonly ReportSessionRow[], label: string): number {
  const i = sessions.findIndex((s) => s.label === label);
  if (i < 0) throw new AppError('SESSION_NOT_FOUND', { panel: panel.slice(0, 200), session: label.slice(0, 200) });
  return i;
}

/** Stored results of the sessions as report inputs (reliability from each stored fit). */
function sessionInputs(db: Database, sessions: readonly ReportSessionRow[]): ReportSessionInput[] {
  const analyses = loadSessionAnalyses(db, sessions);
  return sessions.map((s) => {
    const stored = analyses.get(s.label)!;
    const names = new Set([...stored.fits.keys(), ...stored.indices.keys()]);
    return {
      label: s.label,
      date: s.date,
      dataVersion: s.dataVersion,
      fittedDataVersion: stored.fittedDataVersion,
      fitNotes: stored.fitNotes,
      attributes: [...names].map((attribute) => {
        const fit = stored.fits.get(attribute) ?? null;
        return { attribute, fit, reliability: fit ? productMeanReliability(fit) : null, indices: stored.indices.get(attribute) ?? [] };
      }),
    };
  });
}

function scales(db: Database, panelId: number): ReportAttributeScale[] {
  return readPanelAttributes(db, panelId).map((a) => ({ name: a.name, scaleMin: a.scaleMin, scaleMax: a.scaleMax }));
}

function references(db: Database, panelId: number): string[] {
  return listProductRoles(db, panelId)
    .filter((p) => p.role === 'reference')
    .map((p) => p.code);
}

/** Import findings and held cells of the given sessions, plus the refit's notes (fits that could not be made). */
function findingsOf(db: Database, panelId: number, sessions: readonly ReportSessionInput[]): FindingInput[] {
  const labels = new Set(sessions.map((s) => s.label));
  const imported = loadImportFindings(db, panelId)
    .filter((f) => f.session !== null && f.session !== undefined && labels.has(f.session))
    .map((f) => ({ code: f.code, message: f.message, file: f.file, row: f.row, column: f.column, session: f.session, isHeld: false }));
  const held = loadHeldFindings(db, panelId)
    .filter((f) => f.session !== null && f.session !== undefined && labels.has(f.session))
    .map((f) => ({ code: f.code, message: f.message, file: f.file, row: f.row, column: f.column, session: f.session, isHeld: true }));
  const notes = sessions.flatMap((s) =>
    s.fitNotes.map((n) => ({ code: n.code ?? 'fit-note', message: `${n.attribute ? `${n.attribute}: ` : ''}${n.message ?? ''}`, file: null, row: null, column: null, session: s.label, isHeld: false })),
  );
  return [...held, ...imported, ...notes];
}

/** The open cases of the latest flag build, by assessor, attribute and kind. */
function openCases(db: Database, panelId: number): OpenCaseInput[] {
  const byText = (a: string | null, b: string | null): number => (a ?? '').localeCompare(b ?? '');
  return listFlags(db, panelId, { status: 'open' })
    .map((record) => record.flag)
    .sort((a, b) => byText(a.assessor, b.assessor) || byText(a.attribute, b.attribute) || a.kind.localeCompare(b.kind));
}

export function sessionReport(db: Database, panel: string, session: string, options: ReportOptions = {}): SessionReportView {
  const panelId = requirePanelId(db, panel);
  const sessions = listReportSessions(db, panelId);
  const i = sessionIndex(panel, sessions, session);
  const inputs = sessionInputs(db, i > 0 ? [sessions[i - 1], sessions[i]] : [sessions[i]]);
  const current = inputs[inputs.length - 1];
  return buildSessionReportView({
    panel,
    session: current,
    previous: inputs.length > 1 ? inputs[0] : null,
    attributes: scales(db, panelId),
    referenceProducts: references(db, panelId),
    openCases: openCases(db, panelId),
    findings: findingsOf(db, panelId, [current]),
    generatedAt: options.generatedAt ?? new Date(),
    isStandaloneFile: options.isStandaloneFile ?? false,
  });
}

/** Sessions from..to inclusive (session order); both must exist and from must not come after to. */
function sessionRange(panel: string, sessions: readonly ReportSessionRow[], from: string, to: string): ReportSessionRow[] {
  const a = sessionIndex(panel, sessions, from);
  const b = sessionIndex(panel, sessions, to);
  if (a > b) throw new AppError('BAD_REQUEST', { detail: `session ${from} comes after ${to}; give the earlier session first.` });
  return sessions.slice(a, b + 1);
}

export function rangeReport(db: Database, panel: string, from: string, to: string, options: ReportOptions = {}): RangeReportView {
  const panelId = requirePanelId(db, panel);
  const inputs = sessionInputs(db, sessionRange(panel, listReportSessions(db, panelId), from, to));
  return buildRangeReportView({
    panel,
    sessions: inputs,
    attributes: scales(db, panelId),
    referenceProducts: references(db, panelId),
    openCases: openCases(db, panelId),
    findings: findingsOf(db, panelId, inputs),
    generatedAt: options.generatedAt ?? new Date(),
    isStandaloneFile: options.isStandaloneFile ?? false,
  });
}

export type FeedbackPeriod = { session: string } | { from: string; to: string } | Record<string, never>;

/** One assessor's sheet for a session, a range, or (no period given) the panel's latest session. */
export function assessorFeedback(db: Database, panel: string, assessor: string, period: FeedbackPeriod, options: ReportOptions = {}): AssessorFeedbackView {
  const panelId = requirePanelId(db, panel);
  if (!hasAssessor(db, panelId, assessor)) throw new AppError('NOT_FOUND', { path: `feedback for assessor ${assessor.slice(0, 200)}` });
  const all = listReportSessions(db, panelId);
  if (all.length === 0) throw new AppError('BAD_REQUEST', { detail: 'this panel has no sessions yet.' });
  const chosen =
    'session' in period && period.session !== undefined
      ? [all[sessionIndex(panel, all, period.session)]]
      : 'from' in period && period.from !== undefined
        ? sessionRange(panel, all, period.from, period.to)
        : [all[all.length - 1]];
  const inputs = sessionInputs(db, chosen);
  const referenceProducts = references(db, panelId);
  return buildAssessorFeedbackView({
    panel,
    assessor,
    sessions: inputs,
    attributes: scales(db, panelId),
    referenceProducts,
    ownReferenceRatings: loadAssessorRatings(db, panelId, assessor, chosen.map((s) => s.id), referenceProducts),
    generatedAt: options.generatedAt ?? new Date(),
    isStandaloneFile: options.isStandaloneFile ?? false,
  });
}
