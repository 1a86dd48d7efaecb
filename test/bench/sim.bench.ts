/**
 * Benchmark of the fan simulator and the WAV writer.
 * Run: npm run build && node --expose-gc dist/test/bench/sim.bench.js [--json]
 *
 * Measures, for the demo scenario (7 channels at 25.6 kHz): rendering speed against real time with
 * the demo's signal (unbalance, blade pass, noise) and with every fault kind switched on, and the
 * speed of rendering plus writing a WAV file (fsync'ed).
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { loadavg, tmpdir } from 'node:os';
import { join } from 'node:path';
import { loadConfig } from '../../agent/config/load.js';
import { loadScenario, resolveScenario, type Scenario } from '../../drivers/sim/scenario.js';
import { FanSimulator } from '../../drivers/sim/simulator.js';
import { WavWriter } from '../../drivers/wav/writer.js';

const SECONDS = 60;
const BLOCK = 2560;
/** Each figure is the best of this many runs (the machine may be shared). */
const REPEATS = 3;

const cfg = loadConfig('config/example.yaml');
const base = loadScenario('config/example-scenario.yaml');

function withAllFaults(s: Scenario): Scenario {
  const at = 6 * 86400;
  const faults = [
    {
      kind: 'misalignment',
      id: 'm',
      coupling_bearing: 'DE',
      amp_pk_mm_s: 2,
      axial_ratio: 1,
      angle_deg: 0,
      ramp_days: 0,
    },
    {
      kind: 'looseness',
      id: 'l',
      bearing: 'NDE',
      amp_pk_mm_s: 1,
      direction: 'vertical',
      harmonics: 8,
      half_orders: true,
      jitter_deg: 30,
      ramp_days: 0,
    },
    { kind: 'bent_shaft', id: 'b', amp_pk_mm_s: 1, radial_ratio: 0.5, angle_deg: 0, ramp_days: 0 },
    { kind: 'eccentricity', id: 'e', bearing: 'DE', amp_pk_mm_s: 1, angle_deg: 0, ramp_days: 0 },
    {
      kind: 'bearing_defect',
      id: 'bd',
      bearing: 'NDE',
      order: 3.58,
      amp_pk_mm_s: 0.5,
      harmonics: 3,
      ring_hz: 3000,
      ring_pk_g: 0.2,
      ramp_days: 0,
    },
    { kind: 'tone', id: 't', freq_hz: 49.7, amp_pk_mm_s: 0.3, ramp_days: 0 },
  ] as const;
  return {
    ...s,
    timeline: [
      ...s.timeline.filter((e) => e.at < at),
      ...faults.map((fault) => ({ at, fault })),
    ] as Scenario['timeline'],
  };
}

function timeRender(
  scenario: Scenario,
  startDay: number,
): {
  seconds: number;
  cpu_s: number;
  x_realtime: number;
  x_realtime_cpu: number;
  ns_per_sample_channel: number;
  heap_growth_kb: number;
} {
  const plan = resolveScenario(scenario, cfg);
  const sim = new FanSimulator(plan, { startS: startDay * 86400 });
  const out = Array.from({ length: plan.channelCount }, () => new Float32Array(BLOCK));
  const total = SECONDS * plan.sampleRate;
  for (let i = 0; i < 100; i++) sim.render(out, BLOCK); // warm up the JIT (10 s of signal)
  globalThis.gc?.();
  const heap0 = process.memoryUsage().heapUsed;
  let secs = Infinity;
  let cpu = Infinity;
  for (let rep = 0; rep < REPEATS; rep++) {
    const t0 = performance.now();
    const c0 = process.cpuUsage();
    for (let done = 0; done < total; done += BLOCK) sim.render(out, BLOCK);
    const c = process.cpuUsage(c0);
    secs = Math.min(secs, (performance.now() - t0) / 1000);
    cpu = Math.min(cpu, (c.user + c.system) / 1e6);
  }
  globalThis.gc?.();
  const heap1 = process.memoryUsage().heapUsed;
  return {
    seconds: secs,
    cpu_s: cpu,
    x_realtime: SECONDS / secs,
    x_realtime_cpu: SECONDS / cpu,
    ns_per_sample_channel: (cpu * 1e9) / (total * plan.channelCount),
    heap_growth_kb: (heap1 - heap0) / 1024,
  };
}

async function timeWav(): Promise<{ seconds: number; x_realtime: number; mb_per_s: number }> {
  const plan = resolveScenario(base, cfg);
  const dir = mkdtempSync(join(tmpdir(), 'tw-bench-'));
  try {
    const sim = new FanSimulator(plan, { startS: 5.9 * 86400 });
    const out = Array.from({ length: plan.channelCount }, () => new Float32Array(8192));
    const total = SECONDS * plan.sampleRate;
    let best = { secs: Infinity, bytes: 0 };
    for (let rep = 0; rep < REPEATS; rep++) {
      const t0 = performance.now();
      const w = await WavWriter.create(join(dir, 'bench.wav'), {
        sampleRate: plan.sampleRate,
        channelCount: plan.channelCount,
      });
      for (let done = 0; done < total;) {
        const n = Math.min(8192, total - done);
        sim.render(out, n);
        await w.write(out, n);
        done += n;
      }
      const bytes = await w.close();
      const secs = (performance.now() - t0) / 1000;
      if (secs < best.secs) best = { secs, bytes };
    }
    return {
      seconds: best.secs,
      x_realtime: SECONDS / best.secs,
      mb_per_s: best.bytes / 1e6 / best.secs,
    };
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}

const demo = timeRender(base, 5.9);
const faults = timeRender(withAllFaults(base), 6);
const wav = await timeWav();
const result = {
  signal_s: SECONDS,
  channels: 7,
  sample_rate_hz: 25600,
  block_samples: BLOCK,
  best_of: REPEATS,
  render_demo: demo,
  render_all_faults: faults,
  render_and_write_wav: wav,
  gc_exposed: typeof globalThis.gc === 'function',
  load_average_1min: loadavg()[0],
};
if (process.argv.includes('--json')) {
  process.stdout.write(JSON.stringify(result, null, 2) + '\n');
} else {
  const row = (name: string, r: { seconds: number; x_realtime: number }, extra: string) =>
    `  ${name.padEnd(30)} wall ${r.seconds.toFixed(3).padStart(6)} s ` +
    `(${r.x_realtime.toFixed(0).padStart(4)}x real time)  ${extra}`;
  process.stdout.write(
    `fan simulator, ${SECONDS} s of 7 channels at 25.6 kHz, best of ${REPEATS} runs (node ` +
      `${process.version}, ${process.arch}, load average ${loadavg()[0]!.toFixed(1)})\n` +
      row(
        'render, demo scenario',
        demo,
        `cpu ${demo.cpu_s.toFixed(3)} s (${demo.x_realtime_cpu.toFixed(0)}x), ` +
          `${demo.ns_per_sample_channel.toFixed(1)} cpu ns per sample per ` +
          `channel, heap growth ${demo.heap_growth_kb.toFixed(0)} kB`,
      ) +
      '\n' +
      row(
        'render, every fault kind on',
        faults,
        `cpu ${faults.cpu_s.toFixed(3)} s (${faults.x_realtime_cpu.toFixed(0)}x), ` +
          `${faults.ns_per_sample_channel.toFixed(1)} cpu ns per sample per ` +
          `channel, heap growth ${faults.heap_growth_kb.toFixed(0)} kB`,
      ) +
      '\n' +
      row('render + write WAV (fsync)', wav, `${wav.mb_per_s.toFixed(0)} MB/s`) +
      '\n',
  );
}
