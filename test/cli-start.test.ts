import { describe, expect, it, afterAll } from 'vitest';
import { spawnSync } from 'node:child_process';
import { mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { MIN_NODE, nodeVersionProblem } from '../agent/cli/node-version.js';
import { commands } from '../agent/cli/commands/index.js';
import { expectNoStack } from './support/cli.js';

/**
 * How the CLI starts: the command list without any command's dependencies, each command loading
 * only its own, and the Node version check before anything else. Which modules load is read from
 * a real process (module resolve hooks log every import); how long start-up takes is measured by
 * `npm run bench` (test/bench/startup.bench.ts), never here.
 */
const CLI = fileURLToPath(new URL('../dist/agent/cli/main.js', import.meta.url));
const IMPORT_LOG = fileURLToPath(new URL('./support/import-log.mjs', import.meta.url));
const VERSION_AS = fileURLToPath(new URL('./support/node-version-as.mjs', import.meta.url));
const EXAMPLE = fileURLToPath(new URL('../config/example.yaml', import.meta.url));
const dir = mkdtempSync(join(tmpdir(), 'tw-cli-start-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

/**
 * The CLI is a bundle (scripts/post-build.mjs): a chunk holds several modules, listed in
 * chunks/modules.json. A loaded chunk counts as loading each module in it, as file URLs under the
 * package root, so the checks below read the same as for the unbundled modules.
 */
const CHUNKS = fileURLToPath(new URL('../dist/agent/cli/chunks/', import.meta.url));
const ROOT = fileURLToPath(new URL('..', import.meta.url));
const manifest = JSON.parse(readFileSync(join(CHUNKS, 'modules.json'), 'utf8')) as Record<
  string,
  string[]
>;
function bundledModules(url: string): string[] | null {
  const path = url.startsWith('file:') ? fileURLToPath(url) : url;
  const cliDir = join(CHUNKS, '..');
  if (!path.startsWith(cliDir)) return null;
  const inBundle = manifest[path.slice(cliDir.length + 1)];
  return inBundle ? inBundle.map((m) => `file://${join(ROOT, m)}`) : null;
}

/** Runs the compiled CLI and returns its output with the npm packages it imported. */
function runLogged(
  args: string[],
  env: NodeJS.ProcessEnv = {},
  preload: string[] = [],
): {
  code: number | null;
  stdout: string;
  stderr: string;
  packages: Set<string>;
  /** Modules loaded, chunks expanded to the modules in them. */
  modules: string[];
  /** Files Node resolved (chunks, not expanded). */
  files: string[];
} {
  const log = join(dir, `imports-${Math.random().toString(36).slice(2)}.txt`);
  writeFileSync(log, '');
  const r = spawnSync(
    process.execPath,
    ['--import', IMPORT_LOG, ...preload.flatMap((p) => ['--import', p]), CLI, ...args],
    {
      encoding: 'utf8',
      env: { ...process.env, ...env, TW_IMPORT_LOG: log },
      timeout: 60_000,
    },
  );
  const modules = readFileSync(log, 'utf8')
    .split('\n')
    .filter(Boolean)
    .flatMap((u) => bundledModules(u) ?? [u]);
  const packages = new Set(
    modules
      .map((u) => /\/node_modules\/((?:@[^/]+\/)?[^/]+)\//.exec(u)?.[1])
      .filter((p): p is string => !!p),
  );
  const files = readFileSync(log, 'utf8')
    .split('\n')
    .filter((u) => u.startsWith('file:'));
  return { code: r.status, stdout: r.stdout, stderr: r.stderr, packages, modules, files };
}

describe('turnwise start-up', () => {
  it('--help lists every command without loading a single package or command module', () => {
    const r = runLogged(['--help']);
    expect(r.code).toBe(0);
    for (const c of commands) expect(r.stdout).toContain(`  ${c.name}`);
    expect(r.stdout).toContain('validate a YAML config file and print what it sets');
    expect([...r.packages]).toEqual([]);
    expect(r.modules.filter((m) => /\/cli\/commands\/(?!index\.js)/.test(m))).toEqual([]);
  });

  it("help COMMAND shows that command's usage, loading only that command", () => {
    const r = runLogged(['help', 'check-config']);
    expect(r.code).toBe(0);
    expect(r.stdout).toBe('usage: turnwise check-config FILE [--json]\n');
    expect(
      r.modules
        .filter((m) => /\/cli\/commands\/(?!index\.js)/.test(m))
        .map((m) => m.replace(/.*\//, '')),
    ).toEqual(['check-config.js']);
    for (const p of ['mqtt', 'aedes', 'serialport', 'ws', 'pino'])
      expect(r.packages.has(p)).toBe(false);
  });

  it('help for a command that does not exist names it and exits 2', () => {
    const r = runLogged(['help', 'analyse']);
    expect(r.code).toBe(2);
    expect(r.stderr).toBe(
      'turnwise help: unknown command "analyse"\n' +
        '  -> run `turnwise help` for the list of commands\n',
    );
  });

  it('check-config loads the schema and YAML parser, nothing of MQTT, the broker, serial ports, GPIO or the DSP', () => {
    const r = runLogged(['check-config', EXAMPLE]);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/example\.yaml: OK\n/);
    expect(r.packages.has('zod')).toBe(true);
    expect(r.packages.has('yaml')).toBe(true);
    for (const p of ['mqtt', 'aedes', 'serialport', 'onoff', 'ws', 'pino', 'fft.js'])
      expect(r.packages.has(p)).toBe(false);
    expect(r.modules.filter((m) => /\/agent\/(dsp|mqtt|live|outbox)\//.test(m))).toEqual([]);
    // Bundled: zod's messages in English only (none of its other locales), and a handful of files
    // for Node to read instead of the ~300 modules of the unbundled build.
    expect(
      r.modules
        .filter((m) => /node_modules\/zod\/.*\/locales\//.test(m))
        .map((m) => m.replace(/.*\//, '')),
    ).toEqual(['en.js']);
    expect(r.files.filter((f) => f.includes('/node_modules/'))).toEqual([]);
    expect(new Set(r.files).size).toBeLessThan(20);
  });

  it('post-build run again without tsc leaves the bundle as it is (no bundle of the bundle)', () => {
    const before = readFileSync(join(CHUNKS, 'modules.json'), 'utf8');
    const r = spawnSync(process.execPath, [join(ROOT, 'scripts/post-build.mjs')], {
      encoding: 'utf8',
      timeout: 60_000,
    });
    expect(r.status).toBe(0);
    expect(r.stderr).toContain('is already the bundle; nothing to do');
    expect(readFileSync(join(CHUNKS, 'modules.json'), 'utf8')).toBe(before);
  });

  it('the CLI is a bundle: main.js and its chunks, each listed with its modules in chunks/modules.json', () => {
    const chunkFiles = readdirSync(CHUNKS).filter((f) => f.endsWith('.js'));
    expect(Object.keys(manifest).sort()).toEqual(
      ['main.js', ...chunkFiles.map((f) => `chunks/${f}`)].sort(),
    );
    const main = readFileSync(CLI, 'utf8');
    expect(main.startsWith('#!/usr/bin/env node\n')).toBe(true);
    // The entry imports only its own chunks (statically or when a command runs) and node: builtins.
    const specifiers = [...main.matchAll(/\b(?:from|import\()\s*["']([^"']+)["']/g)].map(
      (m) => m[1]!,
    );
    expect(specifiers.length).toBeGreaterThan(commands.length);
    expect(
      specifiers.filter((x) => !/^\.\/chunks\/[\w.-]+\.js$/.test(x) && !x.startsWith('node:')),
    ).toEqual([]);
    const bundled = Object.values(manifest).flat();
    for (const c of commands) expect(bundled).toContain(`dist/agent/cli/commands/${c.name}.js`);
  });

  it('every registered command loads, under the name it is registered with', async () => {
    const loaded = await Promise.all(commands.map((c) => c.load()));
    expect(loaded.map((c) => c.name)).toEqual(commands.map((c) => c.name));
    for (const c of loaded) expect(c.usage).toMatch(new RegExp(`^turnwise ${c.name} `));
  });
});

describe('Node.js version check', () => {
  it('MIN_NODE is the version package.json "engines" asks for', () => {
    const pkg = JSON.parse(
      readFileSync(fileURLToPath(new URL('../package.json', import.meta.url)), 'utf8'),
    ) as { engines: { node: string } };
    expect(pkg.engines.node).toBe(`>=${MIN_NODE.replace(/\.0$/, '')}`);
  });

  it('accepts 20.19.0 and newer, refuses older with the version it needs', () => {
    for (const ok of ['20.19.0', '20.19.5', '20.20.2', '22.0.0', '24.1.0'])
      expect(nodeVersionProblem(ok)).toBeNull();
    for (const old of ['20.18.3', '20.0.0', '18.20.4', '16.20.2']) {
      const m = nodeVersionProblem(old);
      expect(m).toContain(`Node.js ${old} is too old; turnwise needs Node.js 20.19 or newer`);
      expect(m).toMatch(/-> install Node\.js 20 LTS \(20\.19 or later\)/);
    }
  });

  it('an older Node gets one message and exit 2 before any command or package loads', () => {
    const r = runLogged(['check-config', EXAMPLE], { TW_NODE_VERSION_AS: '20.18.1' }, [VERSION_AS]);
    expect(r.code).toBe(2);
    expectNoStack(r.stderr);
    expect(r.stdout).toBe('');
    expect(r.stderr.split('\n').filter(Boolean)).toHaveLength(2);
    expect(r.stderr).toMatch(
      /^turnwise: Node\.js 20\.18\.1 is too old; turnwise needs Node\.js 20\.19 or newer \(.*node\)\n {2}-> install Node\.js 20 LTS/,
    );
    expect([...r.packages]).toEqual([]);
    expect(r.modules.filter((m) => /\/cli\/commands\/(?!index\.js)/.test(m))).toEqual([]);
  });

  it('`npm start` (turnwise demo) on an older Node stops with the same message', () => {
    const r = runLogged(
      ['demo', '--seconds', '1', '--port', '0', '--mqtt-port', '0'],
      { TW_NODE_VERSION_AS: '18.19.1' },
      [VERSION_AS],
    );
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/^turnwise: Node\.js 18\.19\.1 is too old/);
    expect(r.packages.has('aedes')).toBe(false);
  });
});
