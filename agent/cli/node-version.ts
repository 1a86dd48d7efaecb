/**
 * The oldest Node.js this project runs on (package.json "engines"; vite 8 and serialport 13 need
 * it). Checked by the CLI before anything else loads, and by the test run's prerequisites step.
 * Kept free of imports so it loads on any Node.
 */
export const MIN_NODE = '20.19.0';

function parts(v: string): number[] {
  return v
    .replace(/^v/, '')
    .split('.')
    .map((p) => Number.parseInt(p, 10) || 0);
}

/**
 * A one-message explanation when `version` (e.g. process.versions.node) is older than MIN_NODE,
 * else null.
 */
export function nodeVersionProblem(version: string, what = 'turnwise'): string | null {
  const have = parts(version);
  const need = parts(MIN_NODE);
  for (let i = 0; i < 3; i++) {
    if ((have[i] ?? 0) > need[i]!) return null;
    if ((have[i] ?? 0) < need[i]!) {
      return (
        `${what}: Node.js ${version} is too old; turnwise needs Node.js ` +
        `${MIN_NODE.replace(/\.0$/, '')} or newer (${process.execPath})\n` +
        `  -> install Node.js 20 LTS (20.19 or later) or 22, e.g. \`nvm install 20\` ` +
        `or the NodeSource/Debian nodejs 20 package, then run the command again\n`
      );
    }
  }
  return null;
}
