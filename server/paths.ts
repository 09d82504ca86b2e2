import fs from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';

/** The project's folder (the one with package.json), found upward from this file: the same from source and from .build/. */
function findRoot(): string {
  let dir = path.dirname(fileURLToPath(import.meta.url));
  for (;;) {
    if (fs.existsSync(path.join(dir, 'package.json'))) return dir;
    const up = path.dirname(dir);
    if (up === dir) throw new Error('package.json not found above ' + fileURLToPath(import.meta.url));
    dir = up;
  }
}

export const projectRoot = findRoot();
