import type { Flag } from '../../domain/flags.js';
import type { FlagContext } from './context.js';

export function productFlags(_ctx: FlagContext): Flag[] {
  return [];
}
