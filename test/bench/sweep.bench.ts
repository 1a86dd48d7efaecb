/**
 * Benchmark of the sweep analysis (not a test; part of `npm run bench`): the measurement core with
 * the speed-point recorder attached, against the core alone, on a 7-channel (6 sensors + tach)
 * 25.6 kHz coast-down from 1485 to 300 r/min over 60 s (test/support/sweep-rig.ts), on one core
 * (CPU time from process.cpuUsage, best of the timed runs after one warm-up run); then the pure
 * sweep and resonance finding on the points. Also the memory the points take.
 */
import { Analyzer } from '../../agent/dsp/analyzer.js';
import { SpeedPointRecorder } from '../../agent/dsp/speed-points.js';
import { sweepsFromPoints } from '../../agent/sweep/sweeps.js';
import { testConfig } from '../support/config.js';
import { rampProfile, recordSweep, type Mode } from '../support/sweep-rig.js';

const fs = 25600;
const seconds = 64;
const TIMED_RUNS = 5;
const log = (s: string) => process.stderr.write(s + '\n');

log(`sweep bench: integrating a ${seconds} s coast-down, 6 sensors + tach at ${fs} Hz ...`);
const modes: Mode[] = Array.from({ length: 6 }, (_, i) => ({
  fnHz: 12 + 2 * i,
  zeta: 0.05 + 0.01 * i,
  eccentricityMm: 0.03,
  heavyDeg: 40 * i,
  noiseMmS2: 100,
}));
const rec = recordSweep({ sampleRate: fs, seconds, speed: rampProfile(1485, 300, 60, 2), modes });
const cfg = testConfig(
  modes.map(
    (_, i) =>
      [
        `S${i}`,
        i,
        i < 3 ? 'DE' : 'NDE',
        (['vertical', 'horizontal', 'axial'] as const)[i % 3],
      ] as const,
  ),
  { tachChannel: 6, ratedRpm: 1485, machine: { support: 'flexible' } },
);
const block = 4096;
const blocks = Array.from({ length: Math.ceil(rec.channels[0]!.length / block) }, (_, b) => ({
  kind: 'samples' as const,
  startIndex: b * block,
  channels: rec.channels.map((c) => c.subarray(b * block, Math.min(c.length, (b + 1) * block))),
}));

function run(withSweep: boolean): { cpuS: number; points: number; recorder?: SpeedPointRecorder } {
  let best = Infinity;
  let points = 0;
  let recorder: SpeedPointRecorder | undefined;
  for (let rep = 0; rep <= TIMED_RUNS; rep++) {
    const rc = withSweep
      ? new SpeedPointRecorder({
          channels: 6,
          sampleRate: fs,
          resamplePoints: cfg.dsp.resample_points,
          revolutionsPerPoint: cfg.sweep.revolutions_per_point,
        })
      : undefined;
    const an = new Analyzer({
      config: cfg,
      sampleRate: fs,
      channelCount: 7,
      maxBlock: block,
      revolutionTap: rc,
    });
    const c0 = process.cpuUsage();
    for (const b of blocks) an.push(b);
    an.takeWindow();
    const c = process.cpuUsage(c0);
    if (rep > 0) best = Math.min(best, (c.user + c.system) / 1e6);
    points = rc?.length ?? 0;
    recorder = rc;
  }
  return { cpuS: best, points, recorder };
}

const core = run(false);
const swept = run(true);
const pts = swept.recorder!.points();
const t0 = process.cpuUsage();
let found = 0;
for (let i = 0; i < 20; i++) found = sweepsFromPoints(pts, cfg, fs).length;
const tc = process.cpuUsage(t0);
const findS = (tc.user + tc.system) / 1e6 / 20;
const bytesPerPoint = 8 * 2 + 1 + 2 * 8 * 6;
console.log(
  `sweep analysis, 6 ch x 25.6 kHz coast-down: ${(seconds / swept.cpuS).toFixed(0)}x real ` +
    `time on one core (${swept.cpuS.toFixed(3)} s CPU for ${seconds} s); core alone ` +
    `${(seconds / core.cpuS).toFixed(0)}x (${core.cpuS.toFixed(3)} s); best of ${TIMED_RUNS}`,
);
console.log(
  `speed points: ${swept.points} (${cfg.sweep.revolutions_per_point} revolutions each), ` +
    `${bytesPerPoint} bytes each = ${((swept.points * bytesPerPoint) / 1024).toFixed(1)} KiB; ` +
    `finding ${found} sweep(s) and their resonances: ${(findS * 1000).toFixed(2)} ms`,
);

// The event captures' raw ring (agent/capture/raw-ring.ts) at the board's size: 8 channels at
// 25.6 kHz, capture.pre_s + post_s = 10 s (the defaults) plus one 64 Ki-sample block.
{
  const { RawRing } = await import('../../agent/capture/raw-ring.js');
  const ch = 8;
  const before = process.memoryUsage().arrayBuffers;
  const ring = new RawRing(ch, 10 * fs + 65536);
  const after = process.memoryUsage().arrayBuffers;
  const blockN = 256;
  const block = Array.from({ length: ch }, () => new Float32Array(blockN).fill(0.5));
  const seconds = 60;
  const blocksTotal = (seconds * fs) / blockN;
  let bestS = Infinity;
  for (let rep = 0; rep <= TIMED_RUNS; rep++) {
    const c0 = process.cpuUsage();
    for (let b = 0; b < blocksTotal; b++) ring.write(block, ring.end);
    const c = process.cpuUsage(c0);
    if (rep > 0) bestS = Math.min(bestS, (c.user + c.system) / 1e6);
  }
  console.log(
    `capture ring, 8 ch x 25.6 kHz x (10 s + one 65 536-sample ` +
      `block): ${(ring.bytes / 2 ** 20).toFixed(1)} MiB (ArrayBuffers ` +
      `grew ${((after - before) / 2 ** 20).toFixed(1)} MiB); ` +
      `writing 60 s in 256-sample frames: ${(seconds / bestS).toFixed(0)}x ` +
      `real time on one core (${(bestS * 1000).toFixed(1)} ms CPU)`,
  );
}
