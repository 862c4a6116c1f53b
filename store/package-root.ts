import { existsSync, readFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

/**
 * The project folder (the one holding panel-steward's package.json), found by walking up from
 * this module. Works the same from source (store/) and from the build (dist/store/).
 */
export function packageRoot(): string {
  let folder = dirname(fileURLToPath(import.meta.url));
  for (;;) {
    const manifest = join(folder, 'package.json');
    if (existsSync(manifest)) {
      try {
        if ((JSON.parse(readFileSync(manifest, 'utf8')) as { name?: string }).name === 'panel-steward') return folder;
      } catch {
        // not ours or unreadable: keep walking up
      }
    }
    const parent = dirname(folder);
    if (parent === folder) throw new Error('panel-steward package folder not found');
    folder = parent;
  }
}
