/**
 * Evidence for the board (not a test): `npm run bench:agent` (after `npm run build`).
 *
 *  1. real time: the whole agent (simulated board at 25.6 kHz in real time, DSP, watcher, outbox,
 *     MQTT to an in-process broker, live publishing) for --seconds: CPU share of one core, peak and
 *     steady RSS; the simulated fan throws a balance weight part-way and the time from that step to
 *     the MQTT event is measured at the subscriber;
 *  2. soak: 7 simulated days played faster than real time (time_scale 60: a minute of the scenario
 *     per
 *     second of signal): RSS, V8's young generation, live heap and ArrayBuffers after GC beside the
 *     history's size (the heap just after each merge of the history compares like with like), and
 *     the state directory's size on disk;
 *  3. outage: one simulated day with the broker unreachable, then the broker comes back: events
 *     kept on
 *     disk, bytes, and the time to deliver them;
 *  4. serial: the real path as on the plant, in separate processes: `turnwise run` (driver serial,
 *     8 channels x 25.6 kHz, MQTT to a mosquitto started here on a free loopback port) reading
 *     `turnwise sim-board` through a socat pty. The run process's CPU time (utime + stime from
 *     /proc/<pid>/stat, so its thread pool counts too) over --seconds of wall time after 10 s of
 *     settling, repeated --runs times with fresh processes; frames lost anywhere are reported.
 *     Needs socat and mosquitto (Debian packages). `--profile DIR` runs the agent under --cpu-prof.
 * Figures go to stdout; progress to stderr.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { createServer } from 'node:net';
import { mkdtempSync, readdirSync, readFileSync, rmSync, statSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { getHeapSpaceStatistics } from 'node:v8';
import { connect } from 'mqtt';
import { parse } from 'yaml';
import { aedesBroker as broker } from '../support/aedes.js';
import { createSource } from '../../drivers/create-source.js';
import { systemClock } from '../../agent/clock.js';
import { validateConfig } from '../../agent/config/load.js';
import { silentLogger } from '../../agent/log.js';
import { Agent } from '../../agent/runtime/agent.js';
import { Mosquitto } from '../support/mosquitto.js';

const log = (s: string) => process.stderr.write(`bench: ${s}\n`);
const mb = (bytes: number, digits = 1) => (bytes / 2 ** 20).toFixed(digits);
const configFile = fileURLToPath(new URL('../../../config/example.yaml', import.meta.url));
const arg = (name: string, def: number) => {
  const i = process.argv.indexOf(`--${name}`);
  return i > 0 ? Number(process.argv[i + 1]) : def;
};
const strArg = (name: string) => {
  const i = process.argv.indexOf(`--${name}`);
  return i > 0 ? process.argv[i + 1] : undefined;
};

function config(over: Record<string, unknown>) {
  const raw = parse(readFileSync(configFile, 'utf8')) as Record<string, unknown>;
  return validateConfig(
    {
      ...raw,
      state_dir: mkdtempSync(join(tmpdir(), 'tw-bench-agent-')),
      logging: { level: 'error' },
      ...over,
    },
    'bench config',
  );
}

function dirBytes(dir: string): number {
  let n = 0;
  for (const e of readdirSync(dir, { withFileTypes: true })) {
    const p = join(dir, e.name);
    n += e.isDirectory() ? dirBytes(p) : statSync(p).size;
  }
  return n;
}

async function realtime(seconds: number): Promise<void> {
  const b = await broker();
  // Day 5 14:20 the balance weight W1 is thrown (config/example-scenario.yaml); start 20 s before
  // it.
  const stepAtS = 20;
  const fromDay = 5 + (14 * 3600 + 20 * 60 - stepAtS) / 86400;
  const cfg = config({
    acquisition: {
      driver: 'sim',
      scenario: 'example-scenario.yaml',
      pace: 'realtime',
      time_scale: 1,
      from_day: fromDay,
    },
    mqtt: { url: b.url, topic_prefix: 'bench' },
  });
  const sub = connect(b.url);
  const arrivals: Array<{ type: string; at: number }> = [];
  await new Promise<void>((r) =>
    sub.once('connect', () => sub.subscribe('bench/+/event/#', { qos: 1 }, () => r())),
  );
  sub.on('message', (topic) => arrivals.push({ type: topic.split('/').pop()!, at: Date.now() }));
  const { source } = createSource(cfg, configFile, { log: silentLogger });
  const agent = new Agent({
    config: cfg,
    source,
    boardTimesTach: false,
    clock: systemClock,
    logger: silentLogger,
  });
  const rss: number[] = [];
  let t0 = 0;
  let c0 = process.cpuUsage();
  const timer = setInterval(() => rss.push(process.memoryUsage().rss), 1000);
  const stopAt = setTimeout(() => agent.stop(), seconds * 1000);
  const run = agent.run(3000);
  t0 = Date.now();
  c0 = process.cpuUsage();
  log(
    `real time: ${seconds} s of the simulated board ` +
      `at 25.6 kHz, weight thrown after ${stepAtS} s ...`,
  );
  await run;
  const wall = (Date.now() - t0) / 1000;
  const c = process.cpuUsage(c0);
  clearInterval(timer);
  clearTimeout(stopAt);
  const steady = rss.slice(Math.floor(rss.length / 2)).sort((a, b2) => a - b2);
  const firstAfter = arrivals.filter(
    (a) =>
      a.at > t0 + stepAtS * 1000 &&
      ['vector_change', 'zone_changed', 'alarm_level_exceeded', 'unbalance_kind_changed'].includes(
        a.type,
      ),
  );
  console.log(
    `agent in real time, 7 channels x 25.6 kHz (6 sensors + tach), watcher, outbox, ` +
      `MQTT, live: ${(((c.user + c.system) / 1e6 / wall) * 100).toFixed(1)} % of one ` +
      `core over ${wall.toFixed(0)} s (in-process broker included)`,
  );
  console.log(
    `RSS: peak ${(Math.max(...rss) / 2 ** 20).toFixed(0)} MB, steady (median of the ` +
      `second half) ${(steady[Math.floor(steady.length / 2)]! / 2 ** 20).toFixed(0)} MB`,
  );
  if (firstAfter.length)
    console.log(
      `step change (weight thrown) to first MQTT event (${firstAfter[0]!.type}): ` +
        `${((firstAfter[0]!.at - (t0 + stepAtS * 1000)) / 1000).toFixed(1)} s`,
    );
  else console.log('step change to MQTT event: no event arrived after the step');
  sub.end(true);
  await b.close();
}

async function soak(days: number, timeScale: number): Promise<void> {
  const b = await broker();
  const cfg = config({
    acquisition: {
      driver: 'sim',
      scenario: 'example-scenario.yaml',
      pace: 'fast',
      time_scale: timeScale,
      from_day: 0,
    },
    mqtt: { url: b.url, topic_prefix: 'soak' },
  });
  const { source } = createSource(cfg, configFile, { log: silentLogger });
  const agent = new Agent({
    config: cfg,
    source,
    boardTimesTach: false,
    clock: systemClock,
    logger: silentLogger,
    startMs: Date.UTC(2026, 0, 5),
    timeScale,
  });
  const signalS = (days * 86400) / timeScale;
  const maxPoints = cfg.watcher.history.max_points;
  const windowSamples = cfg.watcher.window_s * 25600;
  // One sample a second: RSS; live heap and ArrayBuffer memory after a full collection (a leak
  // shows there; RSS alone also shows the allocator's slack); V8's young generation; the history's
  // size.
  const samples: Array<{
    win: number;
    rss: number;
    heap: number;
    ab: number;
    young: number;
    hist: number;
  }> = [];
  const gc = (globalThis as { gc?: () => void }).gc;
  const t0 = Date.now();
  const timer = setInterval(() => {
    gc?.();
    const m = process.memoryUsage();
    const young =
      getHeapSpaceStatistics().find((s) => s.space_name === 'new_space')?.space_size ?? 0;
    samples.push({
      win: agent.status?.window ? Math.round(agent.status.window.end_index / windowSamples) : 0,
      rss: m.rss,
      heap: m.heapUsed,
      ab: m.arrayBuffers,
      young,
      hist: agent.watcher.historySize,
    });
    const l = samples[samples.length - 1]!;
    if (samples.length % 10 === 0)
      log(
        `soak: ${((Date.now() - t0) / 1000).toFixed(0)} s, RSS ` +
          `${mb(l.rss, 0)} MB, heap ${mb(l.heap)} MB, history ${l.hist} points`,
      );
  }, 1000);
  // The simulated source never ends by itself: stop after the signal of `days` days has been
  // played.
  let done = false;
  const check = setInterval(() => {
    if (
      !done &&
      agent.status &&
      agent.status.window &&
      agent.status.window.end_index / 25600 >= signalS
    ) {
      done = true;
      agent.stop();
    }
  }, 200);
  log(
    `soak: ${days} simulated days at time_scale ` +
      `${timeScale} (${signalS.toFixed(0)} s of signal, as fast as it goes) ...`,
  );
  const sum = await agent.run(5000);
  clearInterval(timer);
  clearInterval(check);
  const at = (f: number) => samples[Math.min(samples.length - 1, Math.floor(samples.length * f))]!;
  const series = (get: (s: (typeof samples)[number]) => string) =>
    [0.1, 0.5, 0.9, 1].map((f) => get(at(f))).join(' / ');
  console.log(
    `soak: ${days} simulated days (${signalS.toFixed(0)} s of ` +
      `signal) in ${((Date.now() - t0) / 1000).toFixed(0)} s ` +
      `wall; ${sum.windows} windows, ${sum.events} events`,
  );
  console.log(
    `soak RSS at 10/50/90/100 % of the run: ${series((s) => mb(s.rss, 0))} MB ` +
      `(V8 young generation ${series((s) => mb(s.young, 0))} MB); state ` +
      `directory ${(dirBytes(cfg.state_dir) / 1024).toFixed(0)} KiB`,
  );
  if (!gc) return void (await b.close());
  console.log(
    `soak live heap after GC at 10/50/90/100 %: ${series((s) => mb(s.heap))} MB ` +
      `with ${series((s) => String(s.hist))} history points; ArrayBuffers ` +
      `${series((s) => mb(s.ab, 2))} MB`,
  );
  // The history is bounded: it grows to max_points, then is merged back to 3/4 of it and grows
  // again.
  const merged = samples.filter((s, i) => i > 0 && s.hist < samples[i - 1]!.hist);
  const full = merged.length ? samples.indexOf(merged[0]!) : -1;
  if (full < 0)
    console.log(`soak: the history did not reach max_points ${maxPoints} (no merge seen)`);
  else {
    const after = samples.slice(full);
    const h = after.map((s) => s.heap);
    console.log(
      `soak: history full (${maxPoints} points, first merge) at window ` +
        `${after[0]!.win} (${((full / samples.length) * 100).toFixed(0)} % of the ` +
        `run); after that live heap ${mb(Math.min(...h))}-${mb(Math.max(...h))} MB ` +
        `(first ${mb(h[0]!)}, last ${mb(h[h.length - 1]!)} MB), ArrayBuffers ` +
        `${mb(after[0]!.ab, 2)} -> ${mb(after[after.length - 1]!.ab, 2)} MB`,
    );
    // Like for like: the heap just after each merge, when the history is back to about 3/4 of
    // max_points.
    console.log(
      `soak: live heap just after each merge of the history: ` +
        `${merged.map((s) => `${mb(s.heap)} MB (window ${s.win}, ${s.hist} points)`).join(', ')}`,
    );
  }
  await b.close();
}

async function outage(timeScale: number): Promise<void> {
  // A port nobody listens on for one simulated day, then a broker on that port.
  const probe = createServer();
  await new Promise<void>((r) => probe.listen(0, '127.0.0.1', () => r()));
  const port = (probe.address() as { port: number }).port;
  await new Promise<void>((r) => probe.close(() => r()));
  const cfg = config({
    acquisition: {
      driver: 'sim',
      scenario: 'example-scenario.yaml',
      pace: 'fast',
      time_scale: timeScale,
      from_day: 4.9,
    },
    mqtt: { url: `mqtt://127.0.0.1:${port}`, topic_prefix: 'outage' },
  });
  const { source } = createSource(cfg, configFile, { log: silentLogger });
  const agent = new Agent({
    config: cfg,
    source,
    boardTimesTach: false,
    clock: systemClock,
    logger: silentLogger,
    startMs: Date.UTC(2026, 0, 5) + 4.9 * 86400_000,
    timeScale,
  });
  const signalS = 86400 / timeScale;
  const check = setInterval(() => {
    if (agent.status?.window && agent.status.window.end_index / 25600 >= signalS) agent.stop();
  }, 200);
  log(`outage: one simulated day (day 4.9 to 5.9, the weight is thrown) with the broker down ...`);
  const sum = await agent.run(0);
  clearInterval(check);
  const outboxDir = join(cfg.state_dir, 'outbox');
  const kept = readdirSync(outboxDir).filter((f) => f.endsWith('.rec'));
  console.log(
    `outage: ${sum.events} events in one simulated day with the broker down; ` +
      `${kept.length} kept on disk, ${(dirBytes(outboxDir) / 1024).toFixed(0)} KiB`,
  );
  const b = await broker(port);
  const sub = connect(b.url);
  let got = 0;
  await new Promise<void>((r) =>
    sub.once('connect', () => sub.subscribe('outage/+/event/#', { qos: 1 }, () => r())),
  );
  sub.on('message', () => got++);
  const t0 = Date.now();
  // The next start delivers what was kept: run the agent again for a moment on the same state.
  const cfg2 = { ...cfg, acquisition: { ...cfg.acquisition!, from_day: 5.9 } } as typeof cfg;
  const again = new Agent({
    config: cfg2,
    source: createSource(cfg2, configFile, { log: silentLogger }).source,
    boardTimesTach: false,
    clock: systemClock,
    logger: silentLogger,
    timeScale,
  });
  setTimeout(() => again.stop(), 1000);
  const s2 = await again.run(60_000);
  const left = readdirSync(outboxDir).filter((f) => f.endsWith('.rec')).length;
  console.log(
    `outage: broker back: ${got} events received in ` +
      `${((Date.now() - t0) / 1000).toFixed(1)} s, drained ${s2.drained}, ${left} left on disk`,
  );
  sub.end(true);
  await b.close();
}

/** CPU time (user, system) of a process so far, s, from /proc/<pid>/stat. */
function procCpuS(pid: number, file = `/proc/${pid}/stat`): { user: number; system: number } {
  const stat = readFileSync(file, 'utf8');
  // Fields after the command name (which may hold spaces) in parentheses; utime and stime are
  // fields 14 and 15.
  const f = stat.slice(stat.lastIndexOf(')') + 2).split(' ');
  const tick = 100; // USER_HZ: 100 on every Linux architecture the board runs
  return { user: Number(f[11]) / tick, system: Number(f[12]) / tick };
}

/**
 * CPU time so far of each thread of a process, s, by thread name (the main thread first, as
 * "main").
 */
function threadCpuS(pid: number): Map<string, number> {
  const by = new Map<string, number>();
  for (const tid of readdirSync(`/proc/${pid}/task`)) {
    let name: string;
    let cpu: { user: number; system: number };
    try {
      name =
        Number(tid) === pid ? 'main' : readFileSync(`/proc/${pid}/task/${tid}/comm`, 'utf8').trim();
      cpu = procCpuS(Number(tid), `/proc/${pid}/task/${tid}/stat`);
    } catch {
      continue; // the thread ended meanwhile
    }
    by.set(name, (by.get(name) ?? 0) + cpu.user + cpu.system);
  }
  return by;
}

/** Resident memory now (VmRSS) and its peak since start (VmHWM), MB. */
function procRssMb(pid: number): { now: number; peak: number } {
  const status = readFileSync(`/proc/${pid}/status`, 'utf8');
  const kb = (field: string) =>
    Number(new RegExp(`${field}:\\s+(\\d+) kB`).exec(status)?.[1] ?? NaN);
  return { now: kb('VmRSS') / 1024, peak: kb('VmHWM') / 1024 };
}

const loadavg = () => readFileSync('/proc/loadavg', 'utf8').split(' ').slice(0, 3).join(' ');

/**
 * A child process whose output is collected; `waitFor` resolves when its stdout or stderr matches.
 */
function startChild(
  args: string[],
  nodeArgs: string[] = [],
): {
  proc: ChildProcess;
  out: () => string;
  stdout: () => string;
  waitFor(re: RegExp, timeoutMs: number): Promise<void>;
  exited: Promise<number | null>;
} {
  const proc = spawn(process.execPath, [...nodeArgs, cli, ...args], {
    stdio: ['ignore', 'pipe', 'pipe'],
  });
  let text = '';
  let stdout = '';
  proc.stdout!.on('data', (d: Buffer) => {
    text += d.toString();
    stdout += d.toString();
  });
  proc.stderr!.on('data', (d: Buffer) => (text += d.toString()));
  const exited = new Promise<number | null>((r) => proc.once('exit', (code) => r(code)));
  return {
    proc,
    out: () => text,
    stdout: () => stdout,
    exited,
    async waitFor(re, timeoutMs) {
      const t0 = Date.now();
      while (!re.test(text)) {
        if (proc.exitCode !== null || proc.signalCode !== null)
          throw new Error(`${args[0]} exited before /${re.source}/: ${text}`);
        if (Date.now() - t0 > timeoutMs)
          throw new Error(`${args[0]}: no /${re.source}/ within ${timeoutMs} ms: ${text}`);
        await new Promise((r) => setTimeout(r, 50));
      }
    },
  };
}

const cli = fileURLToPath(new URL('../../agent/cli/main.js', import.meta.url));
const scenarioFile = fileURLToPath(
  new URL('../../../config/example-scenario.yaml', import.meta.url),
);

interface SerialRun {
  wall_s: number;
  cpu_pct: number;
  user_s: number;
  system_s: number;
  board_cpu_pct: number;
  /** Share of one core by thread name ("main" = the JavaScript thread). */
  threads_pct: Record<string, number>;
  rss_mb: { now: number; peak: number };
  loadavg_before: string;
  loadavg_after: string;
  live_messages: number;
  windows: number;
  samples: number;
  gaps: number;
  frames_sent: number;
  frames_dropped: number;
}

/**
 * One run of `turnwise run` on the serial driver against `turnwise sim-board`, both as processes.
 */
async function serialRun(
  seconds: number,
  broker: Mosquitto,
  profileDir: string | undefined,
): Promise<SerialRun> {
  const dir = mkdtempSync(join(tmpdir(), 'tw-bench-serial-'));
  const link = join(dir, 'board');
  const cfgFile = join(dir, 'agent.yaml');
  const raw = parse(readFileSync(configFile, 'utf8')) as Record<string, unknown>;
  // JSON is YAML. Logging stays at the config's level (info), as on the board.
  writeFileSync(
    cfgFile,
    JSON.stringify({
      ...raw,
      state_dir: join(dir, 'state'),
      acquisition: {
        driver: 'serial',
        device: link,
        sample_rate_hz: 25600,
        channels: 8,
        reconnect_min_ms: 100,
        reconnect_max_ms: 200,
      },
      mqtt: { url: broker.url, topic_prefix: 'bench' },
    }),
  );
  const sub = connect(broker.url);
  let live = 0;
  await new Promise<void>((r) =>
    sub.once('connect', () => sub.subscribe('bench/+/live', { qos: 0 }, () => r())),
  );
  sub.on('message', () => live++);
  // The agent first, waiting for its device; the board second, so the agent opens the pty within
  // reconnect_max_ms of its appearing and nothing is lost at start (the board queues up to 1 s).
  const agent = startChild(
    ['run', '--config', cfgFile, '--last-good', join(dir, 'last-good.yaml')],
    profileDir ? ['--cpu-prof', '--cpu-prof-dir', profileDir] : [],
  );
  const board = startChild([
    'sim-board',
    '--scenario',
    scenarioFile,
    '--config',
    cfgFile,
    '--link',
    link,
    '--from-day',
    '5.625',
    '--json',
  ]);
  try {
    await agent.waitFor(/acquisition started/, 30_000);
    await board.waitFor(/point the agent at it/, 30_000);
    await agent.waitFor(/: opened"/, 10_000);
    // Settle: JIT warm-up, the first windows, the broker session.
    await new Promise((r) => setTimeout(r, 10_000));
    const live0 = live;
    const load0 = loadavg();
    const a0 = procCpuS(agent.proc.pid!);
    const th0 = threadCpuS(agent.proc.pid!);
    const b0 = procCpuS(board.proc.pid!);
    const t0 = performance.now();
    await new Promise((r) => setTimeout(r, seconds * 1000));
    const a1 = procCpuS(agent.proc.pid!);
    const th1 = threadCpuS(agent.proc.pid!);
    const b1 = procCpuS(board.proc.pid!);
    const wall = (performance.now() - t0) / 1000;
    const rss = procRssMb(agent.proc.pid!);
    const liveN = live - live0;
    const load1 = loadavg();
    // The agent stops first (it would wait for a vanished device), then the board.
    agent.proc.kill('SIGTERM');
    if ((await agent.exited) !== 0) throw new Error(`turnwise run ended badly: ${agent.out()}`);
    board.proc.kill('SIGINT');
    await board.exited;
    const ended = agent
      .stdout()
      .split('\n')
      .map((l) => (l.startsWith('{') ? (JSON.parse(l) as Record<string, unknown>) : null))
      .find((l) => l?.msg === 'acquisition ended') as
      { windows: number; samples: number; gaps: number } | undefined;
    const summary = JSON.parse(board.stdout()) as { frames_sent: number; frames_dropped: number };
    if (!ended) throw new Error(`turnwise run did not report its end: ${agent.out()}`);
    const user = a1.user - a0.user;
    const system = a1.system - a0.system;
    return {
      wall_s: wall,
      cpu_pct: ((user + system) / wall) * 100,
      user_s: user,
      system_s: system,
      board_cpu_pct: ((b1.user + b1.system - b0.user - b0.system) / wall) * 100,
      threads_pct: Object.fromEntries(
        [...th1]
          .map(([name, s1]) => [name, ((s1 - (th0.get(name) ?? 0)) / wall) * 100])
          .filter(([, p]) => (p as number) >= 0.05),
      ),
      rss_mb: rss,
      loadavg_before: load0,
      loadavg_after: load1,
      live_messages: liveN,
      windows: ended.windows,
      samples: ended.samples,
      gaps: ended.gaps,
      frames_sent: summary.frames_sent,
      frames_dropped: summary.frames_dropped,
    };
  } finally {
    for (const c of [agent, board])
      if (c.proc.exitCode === null && c.proc.signalCode === null) {
        c.proc.kill('SIGKILL');
        await c.exited;
      }
    sub.end(true);
    rmSync(dir, { recursive: true, force: true });
  }
}

async function serial(
  seconds: number,
  runs: number,
  profileDir: string | undefined,
): Promise<void> {
  const broker = await Mosquitto.start().catch((e: Error) => {
    throw new Error(
      `bench serial: could not start mosquitto (${e.message}); install ` +
        `the Debian package mosquitto, or set TURNWISE_MOSQUITTO to its path`,
    );
  });
  const cpus: number[] = [];
  try {
    for (let i = 1; i <= runs; i++) {
      log(
        `serial: run ${i}/${runs}: turnwise run (serial, 8 ch x ` +
          `25.6 kHz, MQTT to mosquitto) reading turnwise sim-board ` +
          `through a socat pty, ${seconds} s measured after 10 s ...`,
      );
      const r = await serialRun(seconds, broker, profileDir);
      cpus.push(r.cpu_pct);
      // sim-board's own frames in flight at the agent's stop are the only ones it may not have
      // read.
      const unread = r.frames_sent - r.frames_dropped - r.samples / 256;
      console.log(
        `serial run ${i}: turnwise run ${r.cpu_pct.toFixed(1)} % of ` +
          `one core over ${r.wall_s.toFixed(0)} s (user ` +
          `${r.user_s.toFixed(2)} s, system ${r.system_s.toFixed(2)} s); ` +
          `threads: ${Object.entries(r.threads_pct)
            .map(([n, p]) => `${n} ${p.toFixed(1)} %`)
            .join(
              ', ',
            )}; RSS ${r.rss_mb.now.toFixed(0)} MB (peak ${r.rss_mb.peak.toFixed(0)} MB); sim-board ${r.board_cpu_pct.toFixed(1)} %; load average ${r.loadavg_before} -> ${r.loadavg_after}; ` +
          `${r.live_messages} live messages in the measurement; whole ` +
          `run: ${r.windows} windows, frames ${r.frames_sent} sent, ` +
          `${r.frames_dropped} dropped by the board, ${r.gaps} gap(s) ` +
          `at the agent, ${unread} sent after the agent stopped reading`,
      );
    }
    if (runs > 1)
      console.log(
        `serial: turnwise run ${[...cpus]
          .sort((a, b) => a - b)
          .map((c) => c.toFixed(1))
          .join(', ')} % of one core over ${runs} runs`,
      );
  } finally {
    await broker.dispose();
  }
}

const which = process.argv[2] ?? 'all';
if (which === 'all' || which === 'realtime') await realtime(arg('seconds', 60));
if (which === 'all' || which === 'soak') await soak(arg('days', 7), arg('time-scale', 60));
if (which === 'all' || which === 'outage') await outage(arg('outage-time-scale', 600));
if (which === 'all' || which === 'serial')
  await serial(arg('seconds', 60), arg('runs', 3), strArg('profile'));
process.exit(0);
