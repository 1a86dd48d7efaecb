import { describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import {
  chmodSync,
  cpSync,
  existsSync,
  lstatSync,
  mkdirSync,
  mkdtempSync,
  readFileSync,
  readdirSync,
  readlinkSync,
  statSync,
  symlinkSync,
  writeFileSync,
} from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';

/**
 * deploy/: the systemd unit, the udev rules and install.sh, tested as far as a machine without
 * systemd as PID 1 allows: systemd's own offline checks of the unit, install.sh in --dry-run (with
 * every command that changes the system replaced by a trap), and install.sh for real into a staging
 * root (--root), which runs the file side of install, upgrade, rollback and uninstall for real.
 */

const REPO = fileURLToPath(new URL('..', import.meta.url));
const DEPLOY = join(REPO, 'deploy');
const INSTALL = join(DEPLOY, 'install.sh');
const UNIT_FILE = join(DEPLOY, 'turnwise.service');
const DAQ_RULES = join(DEPLOY, 'udev/70-turnwise-daq.rules');
const GPIO_RULES = join(DEPLOY, 'udev/99-turnwise-gpio.rules');

function which(cmd: string): string | null {
  const r = spawnSync('sh', ['-c', `command -v ${cmd}`], { encoding: 'utf8' });
  return r.status === 0 ? r.stdout.trim() : null;
}
const SYSTEMD_ANALYZE = which('systemd-analyze');
const SHELLCHECK = which('shellcheck');
const SYSTEMCTL = which('systemctl');
for (const [tool, pkg] of [
  [SYSTEMD_ANALYZE, 'systemd'],
  [SHELLCHECK, 'shellcheck'],
] as const) {
  if (!tool)
    console.warn(
      `test/deploy.test.ts: ${pkg} is not installed, ` +
        `its checks are SKIPPED (apt-get install ${pkg})`,
    );
}
/** Test names carry the reason when a tool is missing, so a skip is never silent. */
const needs = (tool: string | null, pkg: string, name: string) =>
  tool ? name : `${name} [SKIPPED: ${pkg} is not installed; apt-get install ${pkg}]`;

function run(args: string[], env: NodeJS.ProcessEnv = {}) {
  const r = spawnSync('bash', [INSTALL, ...args], {
    encoding: 'utf8',
    env: { ...process.env, TURNWISE_NODE: process.execPath, ...env },
    timeout: 300_000,
  });
  return { code: r.status, out: r.stdout, err: r.stderr };
}

function tmp(prefix: string): string {
  return mkdtempSync(join(tmpdir(), prefix));
}

/** Finds `items` in `lines` in this order (other lines may come between). */
function expectInOrder(lines: string[], items: RegExp[]): void {
  let at = 0;
  for (const re of items) {
    const i = lines.findIndex((l, k) => k >= at && re.test(l));
    if (i < 0)
      throw new Error(`expected a line matching ${re} after line ${at} in:\n${lines.join('\n')}`);
    at = i + 1;
  }
}

describe('systemd unit deploy/turnwise.service', () => {
  const unit = readFileSync(UNIT_FILE, 'utf8');
  const settings = new Map<string, string[]>();
  for (const line of unit.split('\n')) {
    const m = /^([A-Za-z]+)=(.*)$/.exec(line);
    if (m) settings.set(m[1]!, [...(settings.get(m[1]!) ?? []), m[2]!]);
  }
  const one = (k: string) => settings.get(k)?.at(-1);

  it(
    needs(SYSTEMD_ANALYZE, 'systemd', 'passes `systemd-analyze verify` without a single warning'),
    { skip: !SYSTEMD_ANALYZE },
    () => {
      const dir = tmp('tw-unit-');
      // verify checks that ExecStart's binary exists: point it at this machine's node if needed.
      const text = existsSync('/usr/bin/node')
        ? unit
        : unit.replaceAll('/usr/bin/node', process.execPath);
      writeFileSync(join(dir, 'turnwise.service'), text);
      const r = spawnSync(SYSTEMD_ANALYZE!, ['verify', join(dir, 'turnwise.service')], {
        encoding: 'utf8',
      });
      const mine = (r.stderr + r.stdout).split('\n').filter((l) => l.includes('turnwise.service'));
      expect(mine).toEqual([]);
      expect(r.status).toBe(0);
    },
  );

  it(
    needs(
      SYSTEMD_ANALYZE,
      'systemd',
      'rates "OK" in `systemd-analyze security --offline` (exposure at most 2.5 of 10)',
    ),
    { skip: !SYSTEMD_ANALYZE },
    () => {
      const r = spawnSync(
        SYSTEMD_ANALYZE!,
        ['security', '--offline=yes', '--threshold=25', UNIT_FILE],
        { encoding: 'utf8' },
      );
      const m = /Overall exposure level for turnwise\.service: ([\d.]+) (\w+)/.exec(r.stdout);
      expect(m, r.stdout + r.stderr).not.toBeNull();
      expect(Number(m![1])).toBeLessThanOrEqual(2.5); // seen: 2.1 OK with systemd 252
      expect(r.status).toBe(0);
    },
  );

  it('runs the agent the way the rest of deploy/ expects', () => {
    expect(one('Type')).toBe('notify');
    expect(one('NotifyAccess')).toBe('all'); // the sd_notify relay is a child process
    expect(one('WatchdogSec')).toBe('30s');
    expect(one('Restart')).toBe('always');
    expect(one('StartLimitIntervalSec')).toBe('0'); // never give up
    expect(one('User')).toBe('turnwise');
    expect(one('SupplementaryGroups')).toBe('dialout gpio');
    expect(one('StateDirectory')).toBe('turnwise');
    expect(one('ConfigurationDirectory')).toBe('turnwise');
    expect(one('ProtectSystem')).toBe('strict');
    expect(one('SyslogLevelPrefix')).toBe('yes');
    expect(one('MemoryMax')).toBe('256M');
    // The binary the unit starts is the one install.sh links and the build produces.
    const exec = one('ExecStart')!.split(' ');
    expect(exec.slice(0, 2)).toEqual([
      '/usr/bin/node',
      '/opt/turnwise/current/dist/agent/cli/main.js',
    ]);
    expect(existsSync(join(REPO, 'dist/agent/cli/main.js'))).toBe(true);
    expect(readFileSync(INSTALL, 'utf8')).toContain('"$OPT/current/dist/agent/cli/main.js"');
    expect(exec.slice(2)).toEqual(['run', '--config', '/etc/turnwise/turnwise.yaml']);
    // After every stop, however it happened, the advisory outputs are dropped from outside, with
    // the same binary and config (a GPIO line keeps its level when the process that drove it dies).
    expect(one('ExecStopPost')!.split(' ')).toEqual([
      '-/usr/bin/node',
      '/opt/turnwise/current/dist/agent/cli/main.js',
      'outputs-off',
      '--config',
      '/etc/turnwise/turnwise.yaml',
    ]);
    // V8's heap limit sits below the cgroup's, so the heap is collected before the kernel kills.
    const heapMb = Number(/--max-old-space-size=(\d+)/.exec(unit)![1]);
    expect(heapMb).toBeLessThan(Number.parseInt(one('MemoryHigh')!, 10));
  });
});

describe('udev rules deploy/udev/ (installed by install.sh)', () => {
  // udev(7) rule syntax: comma-separated KEY{attr} OP "value" pairs.
  const pair = /^\s*([A-Z_]+)(\{[^}]+\})?\s*(==|!=|\+=|-=|:=|=)\s*"((?:[^"\\]|\\.)*)"\s*$/;
  const parse = (file: string) =>
    readFileSync(file, 'utf8')
      .split('\n')
      .filter((l) => l.trim() && !l.startsWith('#'))
      .map((r) =>
        r.split(/,(?=\s*[A-Z_]+(?:\{[^}]+\})?\s*(?:==|!=|\+=|-=|:=|=)\s*")/).map((p) => {
          const m = pair.exec(p);
          if (!m) throw new Error(`${file}: not a udev key/value pair: ${p}\n in rule: ${r}`);
          return { key: m[1]! + (m[2] ?? ''), op: m[3]!, value: m[4]! };
        }),
      );
  type Rule = ReturnType<typeof parse>[number];
  const has = (rule: Rule, key: string, op: string, value: string) =>
    rule.some((p) => p.key === key && p.op === op && p.value === value);

  it('name the acquisition board /dev/turnwise-daq, keep ModemManager away, and carry the id install.sh replaces', () => {
    const daq = parse(DAQ_RULES).filter((r) => has(r, 'SYMLINK', '+=', 'turnwise-daq'));
    expect(daq).toHaveLength(1);
    expect(has(daq[0]!, 'ENV{ID_MM_DEVICE_IGNORE}', '=', '1')).toBe(true);
    expect(has(daq[0]!, 'SUBSYSTEM', '==', 'tty')).toBe(true);
    const installSh = readFileSync(INSTALL, 'utf8');
    const [vid, pid] = /^PLACEHOLDER_USB_ID=([0-9a-f]{4}):([0-9a-f]{4})$/m
      .exec(installSh)!
      .slice(1);
    expect(has(daq[0]!, 'ATTRS{idVendor}', '==', vid!)).toBe(true);
    expect(has(daq[0]!, 'ATTRS{idProduct}', '==', pid!)).toBe(true);
    // Sorts before ModemManager's 77-mm-* and 80-mm-candidate rules.
    expect('70-turnwise-daq.rules' < '77-mm-usb-device-blacklist.rules').toBe(true);
  });

  it('give the gpio group the sysfs GPIO interface', () => {
    const gpio = parse(GPIO_RULES);
    expect(
      gpio.some(
        (r) =>
          has(r, 'SUBSYSTEM', '==', 'gpio') &&
          r.some((p) => p.value.includes('chgrp -R gpio /sys/class/gpio')),
      ),
    ).toBe(true);
  });
});

describe('deploy/install.sh', () => {
  it(needs(SHELLCHECK, 'shellcheck', 'passes shellcheck'), { skip: !SHELLCHECK }, () => {
    const r = spawnSync(SHELLCHECK!, [INSTALL], { encoding: 'utf8' });
    expect(r.stdout + r.stderr).toBe('');
    expect(r.status).toBe(0);
  });

  it('--dry-run prints the whole plan and runs none of it', () => {
    // Every command that could change this machine is replaced by a trap that records the call.
    const shims = tmp('tw-shims-');
    const log = join(shims, 'calls.log');
    for (const cmd of [
      'apt-get',
      'groupadd',
      'useradd',
      'userdel',
      'usermod',
      'systemctl',
      'udevadm',
      'chown',
      'chmod',
      'cp',
      'install',
      'ln',
      'mv',
      'rm',
      'mkdir',
      'touch',
      'npm',
      'flock',
    ]) {
      writeFileSync(join(shims, cmd), `#!/bin/sh\necho "${cmd} $*" >> "${log}"\nexit 97\n`);
      chmodSync(join(shims, cmd), 0o755);
    }
    const r = run(['--dry-run', '--daq-usb-id', '2E8A:000A'], {
      PATH: `${shims}:${process.env.PATH}`,
    });
    expect(r.err.replace(/^install\.sh: WARNING: missing.*\n/m, '')).toBe('');
    expect(r.code).toBe(0);
    expect(existsSync(log) ? readFileSync(log, 'utf8') : '').toBe('');
    const lines = r.out.split('\n');
    expect(lines[0]).toBe('dry run: nothing is changed');
    const rel = /^release (\d+\.\d+\.\d+-[0-9a-f]{10}) from /m.exec(r.out)![1]!;
    const q = rel.replace(/\./g, '\\.');
    expect(r.out).toMatch(
      /^(\+ useradd --system --user-group --home-dir \/var\/lib\/turnwise --no-create-home --shell \/usr\/sbin\/nologin .* turnwise|user turnwise exists)$/m,
    );
    expectInOrder(lines, [
      new RegExp(
        `^\\+ mkdir -p /opt/turnwise/releases/\\.${q}\\.partial/dist ` +
          `/opt/turnwise/releases/\\.${q}\\.partial/agent/live$`,
      ),
      /^\+ cp -a \S+\/dist\/agent \/opt\/turnwise\/releases\/.*\.partial\/dist\/agent$/,
      /^\+ cp -a \S+\/agent\/live\/page \/opt\/turnwise\/releases\/.*\.partial\/agent\/live\/page$/,
      /^\+ env -C \S+ npm ci --omit=dev --ignore-scripts --no-audit --no-fund$/,
      /^\+ env -C \S+ npm rebuild$/,
      new RegExp(
        `^\\+ mv -T /opt/turnwise/releases/\\.${q}\\.partial /opt/turnwise/releases/${q}$`,
      ),
      new RegExp(`^\\+ ln -sfn releases/${q} /opt/turnwise/\\.current\\.new$`),
      /^\+ mv -T \/opt\/turnwise\/\.current\.new \/opt\/turnwise\/current$/,
      /^\+ install -D -m 0644 \S+\/deploy\/turnwise\.service \/etc\/systemd\/system\/turnwise\.service$/,
      /^acquisition board USB id: 2e8a:000a -> \/dev\/turnwise-daq$/,
      /^\+ install -D -m 0644 \S+ \/etc\/udev\/rules\.d\/70-turnwise-daq\.rules$/,
      /^\+ install -D -m 0644 \S+\/deploy\/udev\/99-turnwise-gpio\.rules \/etc\/udev\/rules\.d\/99-turnwise-gpio\.rules$/,
      /^\+ udevadm control --reload-rules$/,
      /^\+ install -D -m 0644 \S+\/deploy\/journald-turnwise\.conf \/etc\/systemd\/journald\.conf\.d\/60-turnwise\.conf$/,
      /^\+ ln -sfn \/opt\/turnwise\/current\/dist\/agent\/cli\/main\.js \/usr\/local\/bin\/turnwise$/,
      /^\+ systemctl daemon-reload$/,
      /^\+ systemctl enable turnwise\.service$/,
    ]);
  });

  it('refuses bad input with what, where and what to do', () => {
    const old = tmp('tw-oldnode-');
    writeFileSync(join(old, 'node'), '#!/bin/sh\necho 18.19.0\n');
    chmodSync(join(old, 'node'), 0o755);
    const tooOld = run(['--dry-run'], { TURNWISE_NODE: join(old, 'node') });
    expect(tooOld.code).toBe(1);
    expect(tooOld.err).toMatch(
      /Node\.js 18\.19\.0 at .* is too old: turnwise needs 20\.19 or newer\n  -> upgrade Node\.js/,
    );

    const badId = run(['--dry-run', '--daq-usb-id', '2e8a-000a']);
    expect(badId.code).toBe(2);
    expect(badId.err).toContain("--daq-usb-id '2e8a-000a' is not VVVV:PPPP");

    const unknown = run(['--colour']);
    expect(unknown.code).toBe(2);
    expect(unknown.err).toContain("unknown option '--colour'\n  -> run deploy/install.sh --help");

    const notBuilt = run(['--dry-run', '--from', tmp('tw-empty-')]);
    expect(notBuilt.code).toBe(1);
    expect(notBuilt.err).toMatch(
      /package\.json is missing: not a built turnwise release tree\n  -> run `npm ci`/,
    );
  });

  describe('for real into a staging root (--root): install, upgrade, rollback, uninstall', () => {
    /** A small release tree: the real deploy/ and config, a stand-in CLI, no dependencies. */
    function fakeRelease(version: string): string {
      const dir = tmp(`tw-rel-${version}-`);
      cpSync(DEPLOY, join(dir, 'deploy'), { recursive: true });
      mkdirSync(join(dir, 'config'));
      cpSync(join(REPO, 'config/example.yaml'), join(dir, 'config/example.yaml'));
      writeFileSync(
        join(dir, 'package.json'),
        JSON.stringify({ name: 'turnwise', version, type: 'module', private: true }),
      );
      writeFileSync(
        join(dir, 'package-lock.json'),
        JSON.stringify({
          name: 'turnwise',
          version,
          lockfileVersion: 3,
          requires: true,
          packages: { '': { name: 'turnwise', version } },
        }),
      );
      cpSync(join(REPO, 'agent/live/page'), join(dir, 'agent/live/page'), { recursive: true });
      mkdirSync(join(dir, 'dist/agent/cli'), { recursive: true });
      writeFileSync(
        join(dir, 'dist/agent/cli/main.js'),
        `#!/usr/bin/env node
import { readFileSync } from 'node:fs';
const [cmd, file] = process.argv.slice(2);
if (cmd === 'check-config') {
  if (readFileSync(file, 'utf8').includes('REJECT')) { console.error(file + ': machine.id: rejected by ${version}'); process.exit(2); }
  console.log(file + ': OK (${version})');
}
`,
      );
      return dir;
    }

    const root = tmp('tw-root-');
    const relA = fakeRelease('9.9.1');
    const relB = fakeRelease('9.9.2');
    const opt = join(root, 'opt/turnwise');
    const current = () => readlinkSync(join(opt, 'current'));
    const previous = () => readlinkSync(join(opt, 'previous'));
    // A Node.js that is not /usr/bin/node, to see the drop-in that points the unit at it.
    const otherNodeDir = tmp('tw-node-');
    symlinkSync(process.execPath, join(otherNodeDir, 'node'));
    let tokenMade = '';

    it('installs a release: files, links, unit, rules, no start without a config', () => {
      const r = run(['--root', root, '--from', relA, '--daq-usb-id', '2e8a:000a'], {
        TURNWISE_NODE: join(otherNodeDir, 'node'),
      });
      // stderr: at most the missing-packages warning and what `systemctl --root enable` says.
      const unexpected = r.err
        .split('\n')
        .filter(
          (l) =>
            l &&
            !/^install\.sh: WARNING: missing Debian packages|^Created symlink .*multi-user\.target\.wants\/turnwise\.service|non-existent unit multi-user\.target/.test(
              l,
            ),
        );
      expect(unexpected).toEqual([]);
      expect(r.code).toBe(0);
      expect(current()).toMatch(/^releases\/9\.9\.1-[0-9a-f]{10}$/);
      expect(existsSync(join(opt, current(), '.turnwise-release-complete'))).toBe(true);
      // nothing to install: no dependencies
      expect(existsSync(join(opt, current(), 'node_modules'))).toBe(false);
      expect(readFileSync(join(root, 'etc/systemd/system/turnwise.service'), 'utf8')).toBe(
        readFileSync(UNIT_FILE, 'utf8'),
      );
      const dropIn = readFileSync(
        join(root, 'etc/systemd/system/turnwise.service.d/10-node.conf'),
        'utf8',
      );
      expect(dropIn).toContain(
        `[Service]\nExecStart=\nExecStart=${join(otherNodeDir, 'node')} ` +
          `/opt/turnwise/current/dist/agent/cli/main.js run --config ` +
          `/etc/turnwise/turnwise.yaml\n`,
      );
      expect(dropIn).toContain(
        `ExecStopPost=\nExecStopPost=-${join(otherNodeDir, 'node')} ` +
          `/opt/turnwise/current/dist/agent/cli/main.js outputs-off ` +
          `--config /etc/turnwise/turnwise.yaml\n`,
      );
      const rules = readFileSync(join(root, 'etc/udev/rules.d/70-turnwise-daq.rules'), 'utf8');
      expect(rules).toContain(
        'ATTRS{idVendor}=="2e8a", ATTRS{idProduct}=="000a", ENV{ID_MM_DEVICE_IGNORE}="1"',
      );
      expect(readFileSync(join(root, 'etc/udev/rules.d/99-turnwise-gpio.rules'), 'utf8')).toBe(
        readFileSync(GPIO_RULES, 'utf8'),
      );
      expect(
        readFileSync(join(root, 'etc/systemd/journald.conf.d/60-turnwise.conf'), 'utf8'),
      ).toContain('SystemMaxUse=200M');
      expect(existsSync(join(root, 'etc/turnwise/turnwise.yaml.example'))).toBe(true);
      // The live page's operator token: random, 43 base64url characters (256 bits), mode 600.
      const token = join(root, 'etc/turnwise/live-operator-token');
      expect(readFileSync(token, 'utf8')).toMatch(/^[A-Za-z0-9_-]{43}\n$/);
      expect(statSync(token).mode & 0o777).toBe(0o600);
      expect(r.out).toMatch(
        /^\+ \(not run under --root\) chown turnwise:turnwise .*live-operator-token$/m,
      );
      tokenMade = readFileSync(token, 'utf8');
      expect(readlinkSync(join(root, 'usr/local/bin/turnwise'))).toBe(
        '/opt/turnwise/current/dist/agent/cli/main.js',
      );
      if (SYSTEMCTL)
        expect(
          lstatSync(
            join(root, 'etc/systemd/system/multi-user.target.wants/turnwise.service'),
          ).isSymbolicLink(),
        ).toBe(true);
      expect(r.out).toContain('Installed, enabled, not started: there is no config yet.');
      expect(r.out).toMatch(/^\+ \(not run under --root\) useradd --system/m);
    });

    it('changes nothing when run again with the same release (idempotent)', () => {
      const r = run(['--root', root, '--from', relA], {
        TURNWISE_NODE: join(otherNodeDir, 'node'),
      });
      expect(r.code).toBe(0);
      // never replaced
      expect(readFileSync(join(root, 'etc/turnwise/live-operator-token'), 'utf8')).toBe(tokenMade);
      expect(r.out).toMatch(/^release 9\.9\.1-[0-9a-f]{10} is already installed$/m);
      expect(r.out).toContain('current release is already 9.9.1-');
      expect(r.out).toContain('unchanged: /etc/systemd/system/turnwise.service');
      // USB id kept from the installed rules
      expect(r.out).toContain('unchanged: /etc/udev/rules.d/70-turnwise-daq.rules');
      // Only the offline enable and the skipped system calls are printed as actions.
      const actions = r.out
        .split('\n')
        .filter((l) => l.startsWith('+ ') && !l.startsWith('+ (not run under --root)'));
      expect(actions.map((l) => l.replace(root, 'ROOT'))).toEqual(
        SYSTEMCTL ? ['+ systemctl --root=ROOT enable turnwise.service'] : [],
      );
    });

    it('upgrades only when the new release accepts the config, keeping the old one as previous', () => {
      writeFileSync(join(root, 'etc/turnwise/turnwise.yaml'), 'machine: {id: REJECT}\n');
      const refused = run(['--root', root, '--from', relB]);
      expect(refused.code).toBe(1);
      expect(refused.err).toMatch(
        /rejected by 9\.9\.2\ninstall\.sh: release 9\.9\.2-\w+ rejects \/etc\/turnwise\/turnwise\.yaml \(see the lines above\); the running release was left in place/,
      );
      expect(current()).toMatch(/^releases\/9\.9\.1-/);

      writeFileSync(join(root, 'etc/turnwise/turnwise.yaml'), 'machine: {id: kessrow-id3a}\n');
      const r = run(['--root', root, '--from', relB]);
      expect(r.code).toBe(0);
      expect(r.out).toContain(': OK (9.9.2)');
      expect(current()).toMatch(/^releases\/9\.9\.2-/);
      expect(previous()).toMatch(/^releases\/9\.9\.1-/);
      expect(existsSync(join(root, 'etc/systemd/system/turnwise.service.d/10-node.conf'))).toBe(
        false,
      ); // node is /usr/bin/node again
      expect(r.out).toMatch(/^\+ \(not run under --root\) systemctl restart turnwise\.service$/m);
      const list = run(['--root', root, '--list']);
      expect(list.out).toMatch(/^9\.9\.2-\w+ \(current\)\n9\.9\.1-\w+ \(previous\)\n$/);
    });

    it('rolls back to the previous release and forward again by name', () => {
      const b = current().replace('releases/', '');
      const r = run(['--root', root, '--rollback']);
      expect(r.code).toBe(0);
      expect(r.out).toContain(`rolling back from ${b} to 9.9.1-`);
      expect(r.out).toContain(': OK (9.9.1)'); // the old release checks the config too
      expect(current()).toMatch(/^releases\/9\.9\.1-/);
      expect(previous()).toBe(`releases/${b}`);
      expect(run(['--root', root, '--rollback', b]).code).toBe(0);
      expect(current()).toBe(`releases/${b}`);
      const missing = run(['--root', root, '--rollback', '0.0.0-nothing']);
      expect(missing.code).toBe(1);
      expect(missing.err).toContain(
        "release '0.0.0-nothing' is not installed (or incomplete)\n  -> deploy/install.sh --list",
      );
    });

    it('keeps --keep releases besides current and previous', () => {
      // Before: 9.9.2 current, 9.9.1 previous.
      for (const v of ['9.9.3', '9.9.4'])
        expect(run(['--root', root, '--from', fakeRelease(v), '--keep', '1']).code).toBe(0);
      const names = readdirSync(join(opt, 'releases')).sort();
      // current 9.9.4, previous 9.9.3, and the newest other one, 9.9.2; 9.9.1 pruned
      expect(names.map((n) => n.split('-')[0])).toEqual(['9.9.2', '9.9.3', '9.9.4']);
    });

    it('uninstalls, keeping config and state unless --purge', () => {
      mkdirSync(join(root, 'var/lib/turnwise'), { recursive: true });
      const r = run(['--root', root, '--uninstall']);
      expect(r.code).toBe(0);
      for (const p of [
        'opt/turnwise',
        'etc/systemd/system/turnwise.service',
        'etc/udev/rules.d/70-turnwise-daq.rules',
        'etc/udev/rules.d/99-turnwise-gpio.rules',
        'etc/systemd/journald.conf.d/60-turnwise.conf',
        'usr/local/bin/turnwise',
      ]) {
        expect(existsSync(join(root, p)), p).toBe(false);
      }
      if (SYSTEMCTL)
        expect(
          existsSync(join(root, 'etc/systemd/system/multi-user.target.wants/turnwise.service')),
        ).toBe(false);
      expect(existsSync(join(root, 'etc/turnwise/turnwise.yaml'))).toBe(true);
      expect(existsSync(join(root, 'var/lib/turnwise'))).toBe(true);
      const again = run(['--root', root, '--uninstall']);
      expect(again.code).toBe(0);
      expect(again.out).toContain('already absent: /opt/turnwise');
      expect(run(['--root', root, '--uninstall', '--purge']).code).toBe(0);
      expect(existsSync(join(root, 'etc/turnwise'))).toBe(false);
      expect(existsSync(join(root, 'var/lib/turnwise'))).toBe(false);
    });
  });

  it('installs this repository as a real release: production dependencies only, native modules built, CLI runs', () => {
    const root = tmp('tw-realroot-');
    const r = run(['--root', root, '--no-journald-limits']);
    expect(r.code, r.err).toBe(0);
    const rel = join(root, 'opt/turnwise', readlinkSync(join(root, 'opt/turnwise/current')));
    // built on this machine
    expect(existsSync(join(rel, 'node_modules/epoll/build/Release/epoll.node'))).toBe(true);
    expect(existsSync(join(rel, 'node_modules/serialport'))).toBe(true);
    // dev dependencies left out
    expect(existsSync(join(rel, 'node_modules/typescript'))).toBe(false);
    expect(existsSync(join(rel, 'node_modules/vitest'))).toBe(false);
    expect(existsSync(join(rel, 'dist/test'))).toBe(false);
    // The installed CLI works from the release alone.
    const c = spawnSync(
      process.execPath,
      [
        join(rel, 'dist/agent/cli/main.js'),
        'check-config',
        join(root, 'etc/turnwise/turnwise.yaml.example'),
      ],
      { encoding: 'utf8' },
    );
    expect(c.stderr).toBe('');
    expect(c.stdout).toMatch(/turnwise\.yaml\.example: OK\n {2}machine kessrow-id3a/);
    // The live page is served from the release too (its files are not compiled into dist/): the
    // demo builds the live server, which reads every page file at start or refuses to start.
    const d = spawnSync(
      process.execPath,
      [
        join(rel, 'dist/agent/cli/main.js'),
        'demo',
        '--seconds',
        '2',
        '--port',
        '0',
        '--mqtt-port',
        '0',
      ],
      { encoding: 'utf8', cwd: root, timeout: 60_000 },
    );
    expect(d.status, d.stderr).toBe(0);
    expect(d.stdout).toMatch(/live page\s+http:\/\/127\.0\.0\.1:\d+/);
  }, 300_000);

  const SYSTEM = process.env.TURNWISE_SYSTEM_TESTS === '1';
  it(
    SYSTEM
      ? 'works under systemd as PID 1 (test/system/under-systemd.sh)'
      : 'works under systemd as PID 1 (test/system/under-systemd.sh) [SKIPPED: ' +
          'set TURNWISE_SYSTEM_TESTS=1; needs root, overlayfs and systemd-nspawn]',
    { skip: !SYSTEM, timeout: 900_000 },
    () => {
      const r = spawnSync('bash', [join(REPO, 'test/system/under-systemd.sh')], {
        encoding: 'utf8',
        timeout: 900_000,
      });
      expect(r.stdout).toContain('all checks passed');
      expect(r.status, r.stdout + r.stderr).toBe(0);
    },
  );
});
