/**
 * Benchmark of the measurement core (not a test): `npm run bench`.
 *
 * Real-time factor of the whole core (acceleration, tach, synchronous averaging, decimation,
 * spectrum, window results) for 8 channels at 25.6 kHz, on one core (the process is
 * single-threaded; CPU time from process.cpuUsage), and peak memory. One untimed run first lets
 * the JIT compile the hot loops (its compiler threads count as process CPU time); the figure is
 * the best of the timed runs, since the machine may be shared.
 * `turnwise analyze` as a user runs it, against the numpy/scipy peer, and the CLI's start-up times
 * are in startup.bench.ts, which `npm run bench` runs next.
 */
import { Analyzer } from '../../agent/dsp/analyzer.js';
import { asBlocks, synthesize } from '../support/synth.js';
import { testConfig } from '../support/config.js';

const fs = 25600;
const TIMED_RUNS = 7;
const log = (s: string) => process.stderr.write(s + '\n');

function coreRealtimeFactor(): {
  rtf: number;
  cpuS: number;
  audioS: number;
  peakRssMb: number;
  heapMb: number;
} {
  const seconds = 30;
  const sensors = Array.from({ length: 7 }, (_, i) => ({
    orders: [
      { order: 1, velPk: 3 + i, phaseDeg: 30 * i },
      { order: 2, velPk: 0.5, phaseDeg: 10 },
    ],
    noiseMmS2: 200,
  }));
  log(`bench: synthesizing ${seconds} s x 8 channels at ${fs} Hz ...`);
  const sig = synthesize({
    sampleRate: fs,
    seconds,
    rpm: (t) => 1485 * (1 + 0.005 * Math.sin(t / 5)),
    channels: sensors,
    tachChannel: 7,
  });
  const cfg = testConfig(
    sensors.map(
      (_, i) =>
        [
          `S${i}`,
          i,
          i < 3 ? 'DE' : 'NDE',
          (['vertical', 'horizontal', 'axial'] as const)[i % 3],
        ] as const,
    ),
    { tachChannel: 7, blades: 10, ratedRpm: 1485 },
  );
  const blocks = [...asBlocks(sig, 4096)];
  (globalThis as { gc?: () => void }).gc?.();
  let peakRss = process.memoryUsage().rss;
  let best = Infinity;
  for (let rep = 0; rep <= TIMED_RUNS; rep++) {
    // Start-up (buffers, FFT tables) is not part of the steady-state figure.
    const an = new Analyzer({ config: cfg, sampleRate: fs, channelCount: 8, maxBlock: 4096 });
    const c0 = process.cpuUsage();
    let i = 0;
    for (const b of blocks) {
      an.push(b);
      // A window every ~10 s, as the live agent does.
      if (++i % 62 === 0) an.takeWindow();
    }
    an.takeWindow();
    const c = process.cpuUsage(c0);
    if (rep > 0) best = Math.min(best, (c.user + c.system) / 1e6);
    peakRss = Math.max(peakRss, process.memoryUsage().rss);
  }
  return {
    rtf: seconds / best,
    cpuS: best,
    audioS: seconds,
    peakRssMb: peakRss / 2 ** 20,
    heapMb: process.memoryUsage().heapUsed / 2 ** 20,
  };
}

const r = coreRealtimeFactor();
console.log(
  `core, 8 ch x 25.6 kHz: ${r.rtf.toFixed(0)}x real time on ` +
    `one core (${r.cpuS.toFixed(3)} s CPU for ${r.audioS} s ` +
    `of signal, best of ${TIMED_RUNS} after a warm-up run)`,
);
console.log(
  `peak RSS ${r.peakRssMb.toFixed(0)} MB (includes the ` +
    `${((8 * 4 * fs * r.audioS) / 2 ** 20).toFixed(0)} MB test ` +
    `signal held in memory); heap in use ${r.heapMb.toFixed(0)} MB`,
);
