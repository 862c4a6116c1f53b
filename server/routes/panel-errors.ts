/**
 * The monitor layer's own errors (monitor/ does not know about HTTP) as the app's error answers:
 * an unknown panel, something not in the panel, a form value that cannot be used.
 */
import { NotInPanel, InvalidInput } from '../../monitor/monitor-context.js';
import { PanelNotFound } from '../../monitor/panel-context.js';
import { AppError } from '../errors.js';

export function asAppError(error: unknown): unknown {
  if (error instanceof PanelNotFound) return new AppError('PANEL_NOT_FOUND', { panel: error.panelName.slice(0, 200) });
  if (error instanceof NotInPanel) return new AppError('NOT_FOUND', { path: error.path });
  if (error instanceof InvalidInput) return new AppError('BAD_REQUEST', { detail: error.detail });
  return error;
}

/** Runs a monitor/ call; its errors become AppErrors (so a page's 404 is seen as one by registerPage). */
export function inPanel<T>(call: () => T): T {
  try {
    return call();
  } catch (error) {
    throw asAppError(error);
  }
}
