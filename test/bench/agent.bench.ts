/**
 * Evidence for the board (not a test): `npm run bench:agent` (after `npm run build`).
 *
 *  1. real time: the whole agent (simulated board at 25.6 kHz in real time, DSP, watcher, outbox,
 *     MQTT to an in-process broker, live publishing) for --seconds: CPU share of one core, peak and
 *     steady RSS; the simulated fan throws a balance weight part-way and the time from that step to
 *     the MQTT event is measured at the subscriber;
 *  2. soak: 7 simulated days played faster than real time (time_scale 60: a minute of the scenario per
 *     second of signal): RSS over the run and the state directory's size on disk;
 *  3. outage: one simulated day with the broker unreachable, then the broker comes back: events kept on
 *     disk, bytes, and the time to deliver them.
 * Figures go to stdout; progress to stderr.
 */
import { createServer } from 'node:net';
import { mkdtempSync, readdirSync, readFileSync, statSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { getHeapSpaceStatistics } from 'node:v8';
import { connect } from 'mqtt';
import { parse } from 'yaml';
import { Aedes } from 'aedes';
import { createSource } from '../../drivers/create-source.js';
import { systemClock } from '../../agent/clock.js';
import { validateConfig } from '../../agent/config/load.js';
import { silentLogger } from '../../agent/log.js';
import { Agent } from '../../agent/runtime/agent.js';

const log = (s: string) => process.stderr.write(`bench: ${s}\n`);
const mb = (bytes: number, digits = 1) => (bytes / 2 ** 20).toFixed(digits);
const configFile = fileURLToPath(new URL('../../../config/example.yaml', import.meta.url));
const arg = (name: string, def: number) => {
  const i = process.argv.indexOf(`--${name}`);
  return i > 0 ? Number(process.argv[i + 1]) : def;
};

async function broker(port = 0): Promise<{ url: string; close(): Promise<void> }> {
  const aedes = await Aedes.createBroker();
  const server = createServer(aedes.handle);
  await new Promise<void>((r) => server.listen(port, '127.0.0.1', () => r()));
  const p = (server.address() as { port: number }).port;
  return {
    url: `mqtt://127.0.0.1:${p}`,
    close: async () => {
      await new Promise<void>((r) => aedes.close(() => r()));
      await new Promise<void>((r) => server.close(() => r()));
    },
  };
}

function config(over: Record<string, unknown>) {
  const raw = parse(readFileSync(configFile, 'utf8')) as Record<string, unknown>;
  return validateConfig({ ...raw, state_dir: mkdtempSync(join(tmpdir(), 'tw-bench-agent-')), logging: { level: 'error' }, ...over }, 'bench config');
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
  // Day 5 14:20 the balance weight W1 is thrown (config/example-scenario.yaml); start 20 s before it.
  const stepAtS = 20;
  const fromDay = 5 + (14 * 3600 + 20 * 60 - stepAtS) / 86400;
  const cfg = config({ acquisition: { driver: 'sim', scenario: 'example-scenario.yaml', pace: 'realtime', time_scale: 1, from_day: fromDay }, mqtt: { url: b.url, topic_prefix: 'bench' } });
  const sub = connect(b.url);
  const arrivals: Array<{ type: string; at: number }> = [];
  await new Promise<void>((r) => sub.once('connect', () => sub.subscribe('bench/+/event/#', { qos: 1 }, () => r())));
  sub.on('message', (topic) => arrivals.push({ type: topic.split('/').pop()!, at: Date.now() }));
  const { source } = createSource(cfg, configFile, { log: silentLogger });
  const agent = new Agent({ config: cfg, source, boardTimesTach: false, clock: systemClock, logger: silentLogger });
  const rss: number[] = [];
  let t0 = 0;
  let c0 = process.cpuUsage();
  const timer = setInterval(() => rss.push(process.memoryUsage().rss), 1000);
  const stopAt = setTimeout(() => agent.stop(), seconds * 1000);
  const run = agent.run(3000);
  t0 = Date.now();
  c0 = process.cpuUsage();
  log(`real time: ${seconds} s of the simulated board at 25.6 kHz, weight thrown after ${stepAtS} s ...`);
  await run;
  const wall = (Date.now() - t0) / 1000;
  const c = process.cpuUsage(c0);
  clearInterval(timer);
  clearTimeout(stopAt);
  const steady = rss.slice(Math.floor(rss.length / 2)).sort((a, b2) => a - b2);
  const firstAfter = arrivals.filter((a) => a.at > t0 + stepAtS * 1000 && ['vector_change', 'zone_changed', 'alarm_level_exceeded', 'unbalance_kind_changed'].includes(a.type));
  console.log(`agent in real time, 7 channels x 25.6 kHz (6 sensors + tach), watcher, outbox, MQTT, live: ${(((c.user + c.system) / 1e6 / wall) * 100).toFixed(1)} % of one core over ${wall.toFixed(0)} s (in-process broker included)`);
  console.log(`RSS: peak ${(Math.max(...rss) / 2 ** 20).toFixed(0)} MB, steady (median of the second half) ${(steady[Math.floor(steady.length / 2)]! / 2 ** 20).toFixed(0)} MB`);
  if (firstAfter.length) console.log(`step change (weight thrown) to first MQTT event (${firstAfter[0]!.type}): ${((firstAfter[0]!.at - (t0 + stepAtS * 1000)) / 1000).toFixed(1)} s`);
  else console.log('step change to MQTT event: no event arrived after the step');
  sub.end(true);
  await b.close();
}

async function soak(days: number, timeScale: number): Promise<void> {
  const b = await broker();
  const cfg = config({ acquisition: { driver: 'sim', scenario: 'example-scenario.yaml', pace: 'fast', time_scale: timeScale, from_day: 0 }, mqtt: { url: b.url, topic_prefix: 'soak' } });
  const { source } = createSource(cfg, configFile, { log: silentLogger });
  const agent = new Agent({ config: cfg, source, boardTimesTach: false, clock: systemClock, logger: silentLogger, startMs: Date.UTC(2026, 0, 5), timeScale });
  const signalS = (days * 86400) / timeScale;
  const maxPoints = cfg.watcher.history.max_points;
  const windowSamples = cfg.watcher.window_s * 25600;
  // One sample a second: RSS; live heap and ArrayBuffer memory after a full collection (a leak shows
  // there; RSS alone also shows the allocator's slack); V8's young generation; the history's size.
  const samples: Array<{ win: number; rss: number; heap: number; ab: number; young: number; hist: number }> = [];
  const gc = (globalThis as { gc?: () => void }).gc;
  const t0 = Date.now();
  const timer = setInterval(() => {
    gc?.();
    const m = process.memoryUsage();
    const young = getHeapSpaceStatistics().find((s) => s.space_name === 'new_space')?.space_size ?? 0;
    samples.push({ win: agent.status?.window ? Math.round(agent.status.window.end_index / windowSamples) : 0, rss: m.rss, heap: m.heapUsed, ab: m.arrayBuffers, young, hist: agent.watcher.historySize });
    const l = samples[samples.length - 1]!;
    if (samples.length % 10 === 0) log(`soak: ${((Date.now() - t0) / 1000).toFixed(0)} s, RSS ${mb(l.rss, 0)} MB, heap ${mb(l.heap)} MB, history ${l.hist} points`);
  }, 1000);
  // The simulated source never ends by itself: stop after the signal of `days` days has been played.
  let done = false;
  const check = setInterval(() => {
    if (!done && agent.status && agent.status.window && agent.status.window.end_index / 25600 >= signalS) {
      done = true;
      agent.stop();
    }
  }, 200);
  log(`soak: ${days} simulated days at time_scale ${timeScale} (${signalS.toFixed(0)} s of signal, as fast as it goes) ...`);
  const sum = await agent.run(5000);
  clearInterval(timer);
  clearInterval(check);
  const at = (f: number) => samples[Math.min(samples.length - 1, Math.floor(samples.length * f))]!;
  const series = (get: (s: (typeof samples)[number]) => string) => [0.1, 0.5, 0.9, 1].map((f) => get(at(f))).join(' / ');
  console.log(`soak: ${days} simulated days (${signalS.toFixed(0)} s of signal) in ${((Date.now() - t0) / 1000).toFixed(0)} s wall; ${sum.windows} windows, ${sum.events} events`);
  console.log(`soak RSS at 10/50/90/100 % of the run: ${series((s) => mb(s.rss, 0))} MB (V8 young generation ${series((s) => mb(s.young, 0))} MB); state directory ${(dirBytes(cfg.state_dir) / 1024).toFixed(0)} KiB`);
  if (!gc) return void (await b.close());
  console.log(`soak live heap after GC at 10/50/90/100 %: ${series((s) => mb(s.heap))} MB with ${series((s) => String(s.hist))} history points; ArrayBuffers ${series((s) => mb(s.ab, 2))} MB`);
  // The history is bounded: it grows to max_points, then is merged back to 3/4 of it and grows again.
  const full = samples.findIndex((s) => s.hist >= maxPoints);
  if (full < 0) console.log(`soak: the history did not reach max_points ${maxPoints}`);
  else {
    const after = samples.slice(full);
    const h = after.map((s) => s.heap);
    console.log(
      `soak: history full (${maxPoints} points) from window ${after[0]!.win} (${((full / samples.length) * 100).toFixed(0)} % of the run); after that live heap ${mb(Math.min(...h))}-${mb(Math.max(...h))} MB ` +
        `(first ${mb(h[0]!)}, last ${mb(h[h.length - 1]!)} MB), ArrayBuffers ${mb(after[0]!.ab, 2)} -> ${mb(after[after.length - 1]!.ab, 2)} MB`,
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
  const cfg = config({ acquisition: { driver: 'sim', scenario: 'example-scenario.yaml', pace: 'fast', time_scale: timeScale, from_day: 4.9 }, mqtt: { url: `mqtt://127.0.0.1:${port}`, topic_prefix: 'outage' } });
  const { source } = createSource(cfg, configFile, { log: silentLogger });
  const agent = new Agent({ config: cfg, source, boardTimesTach: false, clock: systemClock, logger: silentLogger, startMs: Date.UTC(2026, 0, 5) + 4.9 * 86400_000, timeScale });
  const signalS = 86400 / timeScale;
  const check = setInterval(() => {
    if (agent.status?.window && agent.status.window.end_index / 25600 >= signalS) agent.stop();
  }, 200);
  log(`outage: one simulated day (day 4.9 to 5.9, the weight is thrown) with the broker down ...`);
  const sum = await agent.run(0);
  clearInterval(check);
  const outboxDir = join(cfg.state_dir, 'outbox');
  const kept = readdirSync(outboxDir).filter((f) => f.endsWith('.rec'));
  console.log(`outage: ${sum.events} events in one simulated day with the broker down; ${kept.length} kept on disk, ${(dirBytes(outboxDir) / 1024).toFixed(0)} KiB`);
  const b = await broker(port);
  const sub = connect(b.url);
  let got = 0;
  await new Promise<void>((r) => sub.once('connect', () => sub.subscribe('outage/+/event/#', { qos: 1 }, () => r())));
  sub.on('message', () => got++);
  const t0 = Date.now();
  // The next start delivers what was kept: run the agent again for a moment on the same state.
  const cfg2 = { ...cfg, acquisition: { ...cfg.acquisition!, from_day: 5.9 } } as typeof cfg;
  const again = new Agent({ config: cfg2, source: createSource(cfg2, configFile, { log: silentLogger }).source, boardTimesTach: false, clock: systemClock, logger: silentLogger, timeScale });
  setTimeout(() => again.stop(), 1000);
  const s2 = await again.run(60_000);
  const left = readdirSync(outboxDir).filter((f) => f.endsWith('.rec')).length;
  console.log(`outage: broker back: ${got} events received in ${((Date.now() - t0) / 1000).toFixed(1)} s, drained ${s2.drained}, ${left} left on disk`);
  sub.end(true);
  await b.close();
}

const which = process.argv[2] ?? 'all';
if (which === 'all' || which === 'realtime') await realtime(arg('seconds', 60));
if (which === 'all' || which === 'soak') await soak(arg('days', 7), arg('time-scale', 60));
if (which === 'all' || which === 'outage') await outage(arg('outage-time-scale', 600));
process.exit(0);
