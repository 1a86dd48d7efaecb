import { afterAll, describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { chmodSync, existsSync, mkdirSync, mkdtempSync, rmSync, symlinkSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';

/**
 * scripts/test-prereqs.mjs, the first step of `npm test`, run for real with a PATH that lacks
 * tools: as a user who is not root (setpriv to nobody when the test runs as root), with the
 * check-only switch, and without apt-get. It must never install anything here, so every case
 * below is one where installing is not allowed. The child is given 30 s (spawnSync timeout): the
 * script stopping on its own, not being killed, is what "stops within seconds" asks.
 */
const SCRIPT = fileURLToPath(new URL('../scripts/test-prereqs.mjs', import.meta.url));
const VERSION_AS = fileURLToPath(new URL('./support/node-version-as.mjs', import.meta.url));
const root = mkdtempSync(join(tmpdir(), 'tw-prereqs-'));
chmodSync(root, 0o755);
afterAll(() => rmSync(root, { recursive: true, force: true }));

/** A bin directory holding only `tools` (symlinks to the real ones). */
function binWith(name: string, tools: Record<string, string>): string {
  const d = join(root, name);
  mkdirSync(d, { recursive: true });
  chmodSync(d, 0o755);
  for (const [t, real] of Object.entries(tools)) symlinkSync(real, join(d, t));
  return d;
}

const isRoot = process.getuid?.() === 0;
const SETPRIV = ['/usr/bin/setpriv', '/bin/setpriv'].find((p) => existsSync(p));
const APT = ['/usr/bin/apt-get', '/bin/apt-get'].find((p) => existsSync(p));

function prereqs(
  path: string,
  env: NodeJS.ProcessEnv = {},
  opts: { asNobody?: boolean; preload?: string } = {},
) {
  const node = [process.execPath, ...(opts.preload ? ['--import', opts.preload] : []), SCRIPT];
  const cmd =
    opts.asNobody && isRoot
      ? [SETPRIV!, '--reuid=65534', '--regid=65534', '--clear-groups', ...node]
      : node;
  // Only PATH and the switches: nothing of the caller's environment (TURNWISE_PYTHON, ...) leaks
  // in.
  const r = spawnSync(cmd[0]!, cmd.slice(1), {
    encoding: 'utf8',
    env: { PATH: path, HOME: root, ...env },
    timeout: 30_000,
    cwd: root,
  });
  return { code: r.status, signal: r.signal, stdout: r.stdout, stderr: r.stderr };
}

// /usr/sbin is always searched (Debian's mosquitto lives there), and chromium is looked for at
// /usr/bin/chromium, python3 also at /usr/bin/python3: a PATH of only this directory leaves out
// the tools in /usr/bin that the tests start from PATH.
const FROM_USR_BIN = [
  'socat',
  'openssl',
  'protoc',
  'shellcheck',
  'systemd-analyze',
  'mosquitto_passwd',
];

describe('npm test prerequisites (scripts/test-prereqs.mjs)', () => {
  it.runIf(APT && (isRoot ? SETPRIV : true))(
    'as a user who is not root: one message naming each missing tool and the apt-get command, exit 2, nothing installed',
    () => {
      const bin = binWith('no-root', { 'apt-get': APT! });
      const r = prereqs(bin, {}, { asNobody: true });
      expect(r.signal).toBeNull();
      expect(r.code).toBe(2);
      expect(r.stdout).toBe('');
      expect(r.stderr).not.toMatch(/installing|apt-get update -q\n/);
      const lines = r.stderr.split('\n');
      expect(lines[0]).toMatch(
        /^npm test: cannot run the tests: these \d+ tools they use are missing \(not running as root\):$/,
      );
      for (const t of FROM_USR_BIN)
        if (existsSync(`/usr/bin/${t}`))
          expect(r.stderr).toMatch(new RegExp(`\\n  ${t} +.+; Debian package \\S+\\n`));
      expect(r.stderr).toMatch(
        /\n {2}socat +real pseudo-terminals for the serial-port tests; Debian package socat\n/,
      );
      expect(r.stderr).toMatch(
        /\n {2}systemd-analyze +the verification of the systemd unit; Debian package systemd\n/,
      );
      expect(r.stderr).toMatch(/\n {2}protoc +.+; Debian package protobuf-compiler\n/);
      // One install command carrying every package, each once.
      const cmd =
        /\n {7}sudo apt-get update && sudo apt-get install -y --no-install-recommends (.+)\n/.exec(
          r.stderr,
        );
      expect(cmd).not.toBeNull();
      const pkgs = cmd![1]!.split(' ');
      expect(new Set(pkgs).size).toBe(pkgs.length);
      for (const p of ['socat', 'openssl', 'protobuf-compiler', 'shellcheck', 'systemd'])
        expect(pkgs).toContain(p);
      // Found where they are: mosquitto in /usr/sbin, chromium at /usr/bin/chromium.
      if (existsSync('/usr/sbin/mosquitto')) expect(r.stderr).not.toMatch(/\n {2}mosquitto +/);
      if (existsSync('/usr/bin/chromium')) expect(r.stderr).not.toMatch(/\n {2}chromium +/);
    },
  );

  it.runIf(APT)('TURNWISE_TEST_PREREQS=check only checks, even as root', () => {
    const bin = binWith('check-only', { 'apt-get': APT! });
    const r = prereqs(bin, { TURNWISE_TEST_PREREQS: 'check' });
    expect(r.signal).toBeNull();
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(
      /^npm test: cannot run the tests: these \d+ tools they use are missing \(TURNWISE_TEST_PREREQS=check: checking only\):\n/,
    );
    expect(r.stderr).toMatch(/\n {2}socat +/);
    expect(r.stderr).not.toMatch(/installing/);
  });

  it('without apt-get: the same message, saying these are Debian package names', () => {
    const r = prereqs(binWith('no-apt', {}));
    expect(r.signal).toBeNull();
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(
      /^npm test: cannot run the tests: these \d+ tools they use are missing \(there is no apt-get here \(not Debian or Ubuntu\)\):\n/,
    );
    expect(r.stderr).toMatch(
      /\(these are the Debian\/Ubuntu package names; use the same tools from your system's packages\)\n$/,
    );
  });

  it('a python3 without the reference modules is named with the python it checked and the packages', () => {
    const bin = binWith('python', { 'apt-get': APT ?? '/bin/false' });
    // A python3 that does not exist: python3 itself and each module are reported.
    const r = prereqs(bin, {
      TURNWISE_TEST_PREREQS: 'check',
      TURNWISE_PYTHON: join(root, 'no-such-python3'),
    });
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(
      /\n {2}python3 +reference checks and helpers written in Python; Debian package python3\n/,
    );
    expect(r.stderr).toMatch(/\n {2}python3 module numpy +.+; Debian package python3-numpy\n/);
    expect(r.stderr).toMatch(/\n {2}python3 module scipy +.+; Debian package python3-scipy\n/);
    expect(r.stderr).toMatch(
      /\n {2}python3 module google\.protobuf +.+; Debian package python3-protobuf\n/,
    );
  });

  it('on this machine, with its own PATH, everything is there: exit 0 and one line saying so', () => {
    const r = spawnSync(process.execPath, [SCRIPT], {
      encoding: 'utf8',
      env: { ...process.env, TURNWISE_TEST_PREREQS: 'check' },
      timeout: 30_000,
    });
    expect(r.status).toBe(0);
    expect(r.stderr).toMatch(
      /^npm test: prerequisites OK \(Node\.js [\d.]+, mosquitto, mosquitto_passwd, socat, chromium, openssl, protoc, shellcheck, systemd-analyze, \S+ with numpy, scipy, google\.protobuf\) in [\d.]+ s\n$/,
    );
  });

  it('a Node.js older than package.json "engines" stops it first, with the fix', () => {
    const r = prereqs(
      binWith('old-node', {}),
      { TW_NODE_VERSION_AS: '20.18.0' },
      { preload: VERSION_AS },
    );
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(
      /^npm test: Node\.js 20\.18\.0 is too old; turnwise and its test tools need Node\.js 20\.19 or newer \(.+\)\n {2}-> install Node\.js 20 LTS \(20\.19 or later\) or 22, .+ then run `npm ci && npm test` again\n$/,
    );
    expect(r.stderr).not.toMatch(/missing/);
  });
});
