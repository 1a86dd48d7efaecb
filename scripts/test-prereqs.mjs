#!/usr/bin/env node
// The first step of `npm test`: checks that this machine has what the tests use for real (Node
// 20.19+, mosquitto, socat, chromium, openssl, python3 with numpy/scipy/protobuf, protoc,
// shellcheck, systemd-analyze). What is missing is installed with apt-get when this runs as root
// on Debian/Ubuntu; otherwise the run stops at once with one message naming each missing tool and
// the command that installs it, instead of minutes of failing tests.
//
// TURNWISE_TEST_PREREQS=check   only check, never install (also as root)
// TURNWISE_PYTHON=/path/python3 the python3 the tests run (default: python3 on PATH, else
// /usr/bin/python3)
//
// Plain JavaScript with no dependencies, run before `npm run build`, so it works on any Node.
import { spawnSync } from 'node:child_process';
import { accessSync, constants, existsSync, readFileSync } from 'node:fs';
import { delimiter, join } from 'node:path';
import { fileURLToPath } from 'node:url';

const ME = 'npm test';
/** Debian puts mosquitto in /usr/sbin, which a user's PATH often lacks. */
const SBIN = ['/usr/sbin', '/sbin'];

/** The executable `name` on PATH (then /usr/sbin, /sbin), or null. */
export function findExecutable(name, env = process.env) {
  for (const d of [...(env.PATH ?? '').split(delimiter), ...SBIN]) {
    if (!d) continue;
    const f = join(d, name);
    try {
      accessSync(f, constants.X_OK);
      return f;
    } catch {
      // not here
    }
  }
  return null;
}

/** Python modules the tests import, with the Debian package that provides each. */
const PY_MODULES = [
  {
    module: 'numpy',
    pkg: 'python3-numpy',
    why: 'reference WAV reading and the numpy/scipy bench peer',
  },
  { module: 'scipy', pkg: 'python3-scipy', why: 'reference WAV reading (scipy.io.wavfile)' },
  {
    module: 'google.protobuf',
    pkg: 'python3-protobuf',
    why: 'Sparkplug B payloads decoded by the reference protobuf library',
  },
];

/**
 * The modules of PY_MODULES that `python` cannot find (located with importlib, not imported, so
 * this is quick), or null when `python` does not run at all.
 */
function pythonMissing(python, env) {
  const names = PY_MODULES.map((m) => m.module);
  const script =
    `import importlib.util, json, sys\ndef has(n):\n    try:\n` +
    `        return importlib.util.find_spec(n) is not None\n    except ImportError:\n` +
    `        return False\nprint(json.dumps([n for n in sys.argv[1:] if not has(n)]))`;
  const r = spawnSync(python, ['-c', script, ...names], { encoding: 'utf8', env, timeout: 30_000 });
  if (r.status !== 0) return null;
  return JSON.parse(r.stdout);
}

/**
 * The python3 the tests run: TURNWISE_PYTHON when set; else python3 on PATH when it has every
 * module; else /usr/bin/python3 (where Debian's python3-* packages install) when that has them;
 * else whichever of the two exists (its missing modules are then reported).
 */
export function testPython(env = process.env) {
  if (env.TURNWISE_PYTHON) return env.TURNWISE_PYTHON;
  const candidates = [
    findExecutable('python3', env),
    existsSync('/usr/bin/python3') ? '/usr/bin/python3' : null,
  ].filter((p, i, a) => p && a.indexOf(p) === i);
  for (const p of candidates) if (pythonMissing(p, env)?.length === 0) return p;
  return candidates.at(-1) ?? 'python3';
}

/**
 * Tools the tests start, with the Debian package that provides each and what the tests use it for.
 */
const TOOLS = [
  {
    name: 'mosquitto',
    pkg: 'mosquitto',
    why: 'the real MQTT broker the MQTT tests publish to',
    found: (env) => env.TURNWISE_MOSQUITTO ?? findExecutable('mosquitto', env),
  },
  {
    name: 'mosquitto_passwd',
    pkg: 'mosquitto',
    why: 'password files for the broker security tests',
    found: (env) => findExecutable('mosquitto_passwd', env),
  },
  {
    name: 'socat',
    pkg: 'socat',
    why: 'real pseudo-terminals for the serial-port tests',
    found: (env) => findExecutable('socat', env),
  },
  // test/live-page.test.ts starts this exact path through playwright-core.
  {
    name: 'chromium',
    pkg: 'chromium',
    why: 'the real browser for the live-page tests (/usr/bin/chromium)',
    found: () => (existsSync('/usr/bin/chromium') ? '/usr/bin/chromium' : null),
  },
  {
    name: 'openssl',
    pkg: 'openssl',
    why: 'the test CA and certificates for the TLS tests',
    found: (env) => findExecutable('openssl', env),
  },
  {
    name: 'protoc',
    pkg: 'protobuf-compiler',
    why: 'Sparkplug B payload checks against the protobuf compiler',
    found: (env) => findExecutable('protoc', env),
  },
  {
    name: 'shellcheck',
    pkg: 'shellcheck',
    why: 'the lint of deploy/install.sh',
    found: (env) => findExecutable('shellcheck', env),
  },
  {
    name: 'systemd-analyze',
    pkg: 'systemd',
    why: 'the verification of the systemd unit',
    found: (env) => findExecutable('systemd-analyze', env),
  },
];

/** Every missing prerequisite as { name, pkg, why }. */
export function missingPrerequisites(env = process.env) {
  const missing = TOOLS.filter((t) => !t.found(env)).map(({ name, pkg, why }) => ({
    name,
    pkg,
    why,
  }));
  const python = testPython(env);
  const absent = pythonMissing(python, env);
  if (absent === null)
    missing.push({
      name: 'python3',
      pkg: 'python3',
      why: 'reference checks and helpers written in Python',
    });
  for (const m of PY_MODULES)
    if (absent === null || absent.includes(m.module))
      missing.push({
        name: `python3 module ${m.module}${absent ? ` (in ${python})` : ''}`,
        pkg: m.pkg,
        why: m.why,
      });
  return missing;
}

function versionParts(v) {
  return v
    .replace(/^[v>=\s]+/, '')
    .split('.')
    .map((p) => Number.parseInt(p, 10) || 0);
}

/** The message for a Node older than package.json "engines" asks, else null. */
export function nodeProblem(version = process.versions.node) {
  const pkg = JSON.parse(
    readFileSync(fileURLToPath(new URL('../package.json', import.meta.url)), 'utf8'),
  );
  const need = versionParts(pkg.engines.node);
  const have = versionParts(version);
  for (let i = 0; i < 3; i++) {
    if ((have[i] ?? 0) !== (need[i] ?? 0)) {
      if ((have[i] ?? 0) > (need[i] ?? 0)) return null;
      return (
        `${ME}: Node.js ${version} is too old; turnwise and its test tools need Node.js ` +
        `${pkg.engines.node.replace(/^>=/, '')} or newer (${process.execPath})\n` +
        `  -> install Node.js 20 LTS (20.19 or later) or 22, e.g. \`nvm install 20\` or ` +
        `the NodeSource/Debian nodejs 20 package, then run \`npm ci && npm test\` again\n`
      );
    }
  }
  return null;
}

const packagesOf = (missing) => [...new Set(missing.map((m) => m.pkg))];
export const installCommand = (missing) =>
  `apt-get install -y --no-install-recommends ${packagesOf(missing).join(' ')}`;

/** Why this run may not install: null when it may (root, apt-get present, not switched off). */
export function cannotInstallBecause(env = process.env) {
  if (env.TURNWISE_TEST_PREREQS === 'check') return 'TURNWISE_TEST_PREREQS=check: checking only';
  if (!findExecutable('apt-get', env)) return 'there is no apt-get here (not Debian or Ubuntu)';
  if (typeof process.getuid === 'function' && process.getuid() !== 0) return 'not running as root';
  return null;
}

/** The one message for tools that are missing and will not be installed by this run. */
export function missingMessage(missing, why) {
  const w = Math.max(...missing.map((m) => m.name.length));
  const aptLike = !/no apt-get/.test(why);
  const otherPython = missing
    .map((m) => / \(in (.+)\)$/.exec(m.name)?.[1])
    .find((p) => p && p !== '/usr/bin/python3');
  return (
    `${ME}: cannot run the tests: ` +
    `${missing.length === 1 ? 'this tool they use is' : `these ${missing.length} tools they use are`} ` +
    `missing (${why}):\n` +
    missing.map((m) => `  ${m.name.padEnd(w)}  ${m.why}; Debian package ${m.pkg}`).join('\n') +
    `\n  -> install ${missing.length === 1 ? 'it' : 'them'}, then run \`npm test\` again:\n` +
    `       sudo apt-get update && sudo ${installCommand(missing)}\n` +
    (aptLike
      ? ''
      : '     (these are the Debian/Ubuntu package names; ' +
        "use the same tools from your system's packages)\n") +
    (otherPython
      ? `     (Debian's python3-* packages install into /usr/bin/python3; ` +
        `${otherPython} needs them from its own pip, or unset TURNWISE_PYTHON)\n`
      : '')
  );
}

function run(cmd, args) {
  process.stderr.write(`${ME}: ${cmd} ${args.join(' ')}\n`);
  const r = spawnSync(cmd, args, {
    stdio: ['ignore', 2, 2],
    env: { ...process.env, DEBIAN_FRONTEND: 'noninteractive' },
  });
  return r.status === 0;
}

/** Checks, installs what it may; returns the exit code (0: the tests can run). */
export function main() {
  const t0 = Date.now();
  const old = nodeProblem();
  if (old) {
    process.stderr.write(old);
    return 2;
  }
  let missing = missingPrerequisites();
  if (missing.length > 0) {
    const why = cannotInstallBecause();
    if (why) {
      process.stderr.write(missingMessage(missing, why));
      return 2;
    }
    process.stderr.write(
      `${ME}: installing the Debian packages the tests ` +
        `need: ${packagesOf(missing).join(' ')} (missing: ` +
        `${missing.map((m) => m.name).join(', ')})\n`,
    );
    const ok =
      run('apt-get', ['update', '-q']) &&
      run('apt-get', ['install', '-y', '-q', '--no-install-recommends', ...packagesOf(missing)]);
    missing = missingPrerequisites();
    if (missing.length > 0) {
      process.stderr.write(
        missingMessage(
          missing,
          ok ? 'still missing after apt-get install' : 'apt-get failed, see its output above',
        ),
      );
      return 2;
    }
  }
  process.stderr.write(
    `${ME}: prerequisites OK (Node.js ${process.versions.node}, ` +
      `${TOOLS.map((t) => t.name).join(', ')}, ${testPython()} with ` +
      `${PY_MODULES.map((m) => m.module).join(', ')}) in ` +
      `${((Date.now() - t0) / 1000).toFixed(1)} s\n`,
  );
  return 0;
}

if (process.argv[1] && fileURLToPath(import.meta.url) === process.argv[1])
  process.exitCode = main();
