/** Refit jobs: queued by an import or a user, run in the background; their status is shown on the pages. */
import type { Database } from 'better-sqlite3';

export type RefitJobStatus = 'queued' | 'running' | 'done' | 'failed';

export interface RefitJob {
  id: number;
  panelId: number;
  status: RefitJobStatus;
  reason: string;
  nTasks: number;
  nDone: number;
  message: string | null;
  queuedAt: string;
  startedAt: string | null;
  finishedAt: string | null;
}

const SELECT = `SELECT id, panel_id AS panelId, status, reason, n_tasks AS nTasks, n_done AS nDone, message,
                       queued_at AS queuedAt, started_at AS startedAt, finished_at AS finishedAt FROM refit_job`;

export function createRefitJob(db: Database, panelId: number, reason: string, now = new Date().toISOString()): number {
  return Number(
    db.prepare("INSERT INTO refit_job (panel_id, status, reason, queued_at) VALUES (?, 'queued', ?, ?)").run(panelId, reason, now).lastInsertRowid,
  );
}

export function markRefitJob(
  db: Database,
  id: number,
  change: { status?: RefitJobStatus; nTasks?: number; nDone?: number; message?: string | null },
  now = new Date().toISOString(),
): void {
  const job = getRefitJob(db, id);
  if (!job) return;
  const status = change.status ?? job.status;
  db.prepare('UPDATE refit_job SET status = ?, n_tasks = ?, n_done = ?, message = ?, started_at = ?, finished_at = ? WHERE id = ?').run(
    status,
    change.nTasks ?? job.nTasks,
    change.nDone ?? job.nDone,
    change.message === undefined ? job.message : change.message,
    status === 'running' && !job.startedAt ? now : job.startedAt,
    status === 'done' || status === 'failed' ? now : job.finishedAt,
    id,
  );
}

export function getRefitJob(db: Database, id: number): RefitJob | null {
  return (db.prepare(`${SELECT} WHERE id = ?`).get(id) as RefitJob | undefined) ?? null;
}

export function latestRefitJob(db: Database, panelId: number): RefitJob | null {
  return (db.prepare(`${SELECT} WHERE panel_id = ? ORDER BY id DESC LIMIT 1`).get(panelId) as RefitJob | undefined) ?? null;
}

/** Jobs left queued/running by a process that ended are marked failed at start-up. */
export function failInterruptedRefitJobs(db: Database, now = new Date().toISOString()): number {
  return db
    .prepare("UPDATE refit_job SET status = 'failed', message = 'Interrupted: the service stopped before the refit finished.', finished_at = ? WHERE status IN ('queued', 'running')")
    .run(now).changes;
}
