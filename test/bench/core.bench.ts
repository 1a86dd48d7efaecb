/**
 * Benchmark of the measurement core (not a test): `npm run bench`.
 *
 * 1. Real-time factor of the whole core (acceleration, tach, synchronous averaging, decimation,
 *    spectrum, window results) for 8 channels at 25.6 kHz, on one core (the process is
 *    single-threaded; CPU time from process.cpuUsage), and peak memory. One untimed run first lets
 *    the JIT compile the hot loops (its compiler threads count as process CPU time); the figure is
 *    the best of the timed runs, since the machine may be shared.
 * 2. `turnwise analyze` (the compiled CLI, as a user runs it) on a 60 s, 7-channel, 25.6 kHz
 *    recording against test/bench/peer_analyze.py, a plain numpy/scipy script doing the same job.
 */
import { spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { writeFileSync } from 'node:fs';
import { Analyzer } from '../../agent/dsp/analyzer.js';
import { asBlocks, synthesize } from '../support/synth.js';
import { testConfig } from '../support/config.js';
import { writeFloatWav } from '../support/wav.js';

const fs = 25600;
const TIMED_RUNS = 7;
const log = (s: string) => process.stderr.write(s + '\n');

function coreRealtimeFactor(): { rtf: number; cpuS: number; audioS: number; peakRssMb: number; heapMb: number } {
  const seconds = 30;
  const sensors = Array.from({ length: 7 }, (_, i) => ({ orders: [{ order: 1, velPk: 3 + i, phaseDeg: 30 * i }, { order: 2, velPk: 0.5, phaseDeg: 10 }], noiseMmS2: 200 }));
  log(`bench: synthesizing ${seconds} s x 8 channels at ${fs} Hz ...`);
  const sig = synthesize({ sampleRate: fs, seconds, rpm: (t) => 1485 * (1 + 0.005 * Math.sin(t / 5)), channels: sensors, tachChannel: 7 });
  const cfg = testConfig(
    sensors.map((_, i) => [`S${i}`, i, i < 3 ? 'DE' : 'NDE', (['vertical', 'horizontal', 'axial'] as const)[i % 3]] as const),
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
  return { rtf: seconds / best, cpuS: best, audioS: seconds, peakRssMb: peakRss / 2 ** 20, heapMb: process.memoryUsage().heapUsed / 2 ** 20 };
}

function timeCmd(cmd: string, args: string[]): { wallS: number; ok: boolean; out: string; err: string } {
  const t0 = performance.now();
  const r = spawnSync(cmd, args, { encoding: 'utf8', maxBuffer: 64 * 2 ** 20 });
  return { wallS: (performance.now() - t0) / 1000, ok: r.status === 0, out: r.stdout ?? '', err: (r.stderr ?? '') + (r.error ? String(r.error) : '') };
}

function peerComparison(): void {
  const dir = mkdtempSync(join(tmpdir(), 'tw-bench-'));
  try {
    const rec = join(dir, 'rec60.wav');
    log('bench: writing a 60 s, 7-channel (6 sensors + tach) recording ...');
    const sensors = Array.from({ length: 6 }, (_, i) => ({ orders: [{ order: 1, velPk: 4 + i, phaseDeg: 40 * i }], noiseMmS2: 200 }));
    writeFloatWav(rec, fs, synthesize({ sampleRate: fs, seconds: 60, rpm: () => 1485, channels: sensors, tachChannel: 6 }));
    const cfgFile = join(dir, 'cfg.yaml');
    writeFileSync(
      cfgFile,
      `machine: {id: bench, group: 2, support: rigid, rated_rpm: 1485}\ntach: {channel: 6, trigger_v: 2.5}\nsensors:\n` +
        sensors.map((_, i) => `  - {id: S${i}, channel: ${i}, bearing: ${i < 3 ? 'DE' : 'NDE'}, direction: vertical, sensitivity_mv_per_g: 100}`).join('\n') +
        '\n',
    );
    const cli = fileURLToPath(new URL('../../agent/cli/main.js', import.meta.url));
    const peer = fileURLToPath(new URL('../../../test/bench/peer_analyze.py', import.meta.url));
    const tw = [0, 1, 2].map(() => timeCmd(process.execPath, [cli, 'analyze', rec, '--config', cfgFile, '--json']));
    if (!tw[0]!.ok) throw new Error(`turnwise analyze failed: ${tw[0]!.err}`);
    const py = [0, 1, 2].map(() => timeCmd('python3', [peer, rec, '6', '100']));
    const twBest = Math.min(...tw.map((r) => r.wallS));
    if (!py[0]!.ok) {
      log(`bench: peer skipped (python3 with numpy and scipy is needed): ${py[0]!.err.split('\n').slice(-2).join(' ')}`);
      console.log(`turnwise analyze, 60 s x 7 ch at 25.6 kHz: ${twBest.toFixed(2)} s wall (best of 3); numpy/scipy peer: not run`);
      return;
    }
    const pyBest = Math.min(...py.map((r) => r.wallS));
    const a = JSON.parse(tw[0]!.out).channels[0].orders['1'];
    const b = JSON.parse(py[0]!.out).channels[0].orders['1'];
    console.log(`turnwise analyze, 60 s x 7 ch at 25.6 kHz: ${twBest.toFixed(2)} s wall (best of 3)`);
    console.log(`numpy/scipy peer, same file and job:      ${pyBest.toFixed(2)} s wall (best of 3)`);
    console.log(`ratio peer / turnwise: ${(pyBest / twBest).toFixed(2)}x  (1x on S0: turnwise ${a.amp_pk_mm_s} mm/s @ ${a.phase_deg} deg, peer ${b.amp_pk_mm_s.toFixed(3)} mm/s @ ${b.phase_deg.toFixed(1)} deg)`);
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}

const r = coreRealtimeFactor();
console.log(`core, 8 ch x 25.6 kHz: ${r.rtf.toFixed(0)}x real time on one core (${r.cpuS.toFixed(3)} s CPU for ${r.audioS} s of signal, best of ${TIMED_RUNS} after a warm-up run)`);
console.log(`peak RSS ${r.peakRssMb.toFixed(0)} MB (includes the ${((8 * 4 * fs * r.audioS) / 2 ** 20).toFixed(0)} MB test signal held in memory); heap in use ${r.heapMb.toFixed(0)} MB`);
peerComparison();
