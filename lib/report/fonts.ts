// The report embeds its fonts (subset) so it renders the same everywhere and can be archived.
// DejaVu Sans (Bitstream Vera licence, DejaVu changes public domain) is looked for in the npm package
// dejavu-fonts-ttf, then in the Debian package fonts-dejavu-core's folder.

import { createRequire } from 'node:module';
import { existsSync } from 'node:fs';
import path from 'node:path';
import { EvenfieldError } from '../errors.js';

export interface FontFiles {
  regular: string;
  bold: string;
  mono: string;
}

const FILES = { regular: 'DejaVuSans.ttf', bold: 'DejaVuSans-Bold.ttf', mono: 'DejaVuSansMono.ttf' } as const;

function candidateFolders(): string[] {
  const folders: string[] = [];
  const env = process.env.EVENFIELD_FONT_DIR;
  if (env) folders.push(env);
  try {
    const require = createRequire(import.meta.url);
    const pkg = require.resolve('dejavu-fonts-ttf/package.json');
    folders.push(path.join(path.dirname(pkg), 'ttf'));
  } catch {
    // package not installed: fall through to the system folder
  }
  folders.push('/usr/share/fonts/truetype/dejavu');
  return folders;
}

let cached: FontFiles | null = null;

/** Paths of the three TrueType fonts the report uses; throws when none of the places has them. */
export function findFonts(): FontFiles {
  if (cached) return cached;
  const tried = candidateFolders();
  for (const dir of tried) {
    const f = {
      regular: path.join(dir, FILES.regular),
      bold: path.join(dir, FILES.bold),
      mono: path.join(dir, FILES.mono),
    };
    if (existsSync(f.regular) && existsSync(f.bold) && existsSync(f.mono)) {
      cached = f;
      return f;
    }
  }
  throw new EvenfieldError(
    'internal',
    `report fonts (DejaVu Sans) not found; looked in ${tried.join(', ')}. Install the npm package dejavu-fonts-ttf or the Debian package fonts-dejavu-core, or set EVENFIELD_FONT_DIR`,
  );
}
