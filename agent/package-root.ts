import { existsSync, readFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

/**
 * The installed package's root: the nearest directory above `fromUrl` (a module's import.meta.url)
 * holding turnwise's package.json. Works from the sources (agent/...), the compiled modules
 * (dist/agent/...), the bundled CLI's chunks (dist/agent/cli/chunks/) and a release on a board.
 */
export function packageRoot(fromUrl: string): string {
  let dir = dirname(fileURLToPath(fromUrl));
  for (;;) {
    const pkg = join(dir, 'package.json');
    if (existsSync(pkg) && isTurnwise(pkg)) return dir;
    const up = dirname(dir);
    if (up === dir)
      throw new Error(`cannot find turnwise's package.json above ${fileURLToPath(fromUrl)}`);
    dir = up;
  }
}

function isTurnwise(pkgFile: string): boolean {
  try {
    return (JSON.parse(readFileSync(pkgFile, 'utf8')) as { name?: unknown }).name === 'turnwise';
  } catch {
    return false;
  }
}
