import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { synthesize } from './support/synth.js';
import { writeFloatWav } from './support/wav.js';
import { runCli } from './support/cli.js';

/**
 * agent/cli/progress.ts: progress goes to stderr only when stderr is a terminal. `turnwise analyze`
 * runs under a real pseudo-terminal (python3's pty module, POSIX openpty) on one of its output
 * streams while the other goes to a file, and on plain pipes.
 */
const CLI = fileURLToPath(new URL('../dist/agent/cli/main.js', import.meta.url));
const PYTHON = existsSync('/usr/bin/python3') ? '/usr/bin/python3' : 'python3';
const dir = mkdtempSync(join(tmpdir(), 'tw-progress-'));
const rec = join(dir, 'rec.wav');
const cfg = join(dir, 'fan.yaml');
const fs = 25600;

// Runs argv with `tty` ("stdout" or "stderr") on the slave side of a new pty and the other stream
// into a file; prints what came out of the pty (latin-1) and the exit code as JSON.
const PTY_RUNNER = `
import json, os, pty, subprocess, sys
which, other_file, argv = sys.argv[1], sys.argv[2], sys.argv[3:]
master, slave = pty.openpty()
with open(other_file, 'wb') as other:
    streams = {'stdout': slave, 'stderr': other} if which == 'stdout' else {'stdout': other, 'stderr': slave}
    p = subprocess.Popen(argv, stdin=subprocess.DEVNULL, **streams)
os.close(slave)
out = b''
while True:
    try:
        chunk = os.read(master, 65536)
    except OSError:
        break  # EIO: every slave descriptor is closed
    if not chunk:
        break
    out += chunk
print(json.dumps({'code': p.wait(), 'tty': out.decode('latin-1')}))
`;

function underPty(
  tty: 'stdout' | 'stderr',
  args: string[],
): { code: number; tty: string; other: string } {
  const other = join(dir, `other-${tty}.txt`);
  const r = spawnSync(PYTHON, ['-c', PTY_RUNNER, tty, other, process.execPath, CLI, ...args], {
    encoding: 'utf8',
    timeout: 60_000,
  });
  if (r.status !== 0) throw new Error(`pty runner failed (${r.status}): ${r.stderr}`);
  const j = JSON.parse(r.stdout) as { code: number; tty: string };
  return { ...j, other: readFileSync(other, 'latin1') };
}

beforeAll(() => {
  const sig = synthesize({
    sampleRate: fs,
    seconds: 12,
    rpm: () => 1485,
    channels: [{ orders: [{ order: 1, velPk: 6.0, phaseDeg: 40 }], noiseMmS2: 100 }],
    tachChannel: 1,
  });
  writeFloatWav(rec, fs, sig);
  writeFileSync(
    cfg,
    `machine: {id: test-fan, group: 2, support: rigid, rated_rpm: 1485}
tach: {channel: 1, trigger_v: 2.5}
sensors:
  - {id: DE-V, channel: 0, bearing: DE, direction: vertical, sensitivity_mv_per_g: 100}
`,
  );
});

afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('progress on stderr (agent/cli/progress.ts)', () => {
  const args = () => ['analyze', rec, '--config', cfg];

  it('shows progress when stderr is a terminal, and clears its line at the end', () => {
    const r = underPty('stderr', args());
    expect(r.code).toBe(0);
    // At least the first update (never throttled), on one line rewritten with \r, erased to its
    // end.
    expect(r.tty).toMatch(/^\ranalyze: +\d{1,3} % \d+\.\d of 12\.0 s\x1b\[K/);
    // done(): back to the start of the line and erase it, so the terminal is left clean.
    expect(r.tty.endsWith('\r\x1b[K')).toBe(true);
    // Nothing but progress on the terminal: every piece is "\r<label>... \x1b[K" or the final
    // erase.
    expect(
      r.tty
        .split('\r')
        .filter(Boolean)
        .every((p) => /^(analyze: .*)?\x1b\[K$/.test(p)),
    ).toBe(true);
    // The results went to stdout (a file here), untouched by the progress.
    expect(r.other).toMatch(/speed 1485\.0 r\/min/);
    expect(r.other).not.toMatch(/\x1b|analyze:/);
  });

  it('shows none when stderr is not a terminal, even when stdout is one', () => {
    const r = underPty('stdout', args());
    expect(r.code).toBe(0);
    expect(r.other).toBe(''); // stderr, a file
    expect(r.tty).toMatch(/speed 1485\.0 r\/min/);
    expect(r.tty).not.toMatch(/analyze: +\d+ %|\x1b\[K/);
  });

  it('shows none on pipes', () => {
    const r = runCli(args());
    expect(r.code).toBe(0);
    expect(r.stderr).toBe('');
    expect(r.stdout).toMatch(/speed 1485\.0 r\/min/);
  });
});
