import { spawnSync } from 'node:child_process';
import { fileURLToPath } from 'node:url';

const CLI = fileURLToPath(new URL('../../dist/agent/cli/main.js', import.meta.url));

export interface CliResult {
  code: number | null;
  stdout: string;
  stderr: string;
}

/** Runs the compiled CLI (npm test builds dist/ first) as a real process. */
export function runCli(
  args: string[],
  opts: { cwd?: string; env?: NodeJS.ProcessEnv; input?: string; timeoutMs?: number } = {},
): CliResult {
  const r = spawnSync(process.execPath, [CLI, ...args], {
    cwd: opts.cwd,
    env: { ...process.env, ...opts.env },
    input: opts.input,
    encoding: 'utf8',
    timeout: opts.timeoutMs ?? 60_000,
  });
  return { code: r.status, stdout: r.stdout, stderr: r.stderr };
}

/** A user mistake must read as one clear message, never as a stack trace. */
export function expectNoStack(stderr: string): void {
  if (/\n\s+at .+:\d+:\d+/.test(stderr) || /internal error/.test(stderr))
    throw new Error(`stderr shows a stack trace:\n${stderr}`);
}
