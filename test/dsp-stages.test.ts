import { describe, expect, it } from 'vitest';
import FFT from 'fft.js';
import {
  AccelerationStage,
  mmPerS2PerVolt,
  RawStats,
  STANDARD_GRAVITY_M_S2,
} from '../agent/dsp/acceleration.js';
import { isoBand, planSpectrumSize } from '../agent/dsp/analyzer.js';
import { bandRms, SpectrumAccumulator, velocityLinePower } from '../agent/dsp/spectrum.js';
import { orderComponent, SampleRing, SyncAverager, wrapDeg } from '../agent/dsp/sync-average.js';
import { RevolutionTracker, TachDetector } from '../agent/dsp/tach.js';
import { gaussian } from './support/synth.js';

describe('fft.js against a direct DFT (reference: the DFT definition X_k = sum x_n e^{-2 pi i k n / N})', () => {
  it('agrees to 1e-9 on a random real signal', () => {
    const N = 256;
    let seed = 3;
    const x = Float64Array.from(
      { length: N },
      () => (seed = (seed * 16807) % 2147483647) / 2147483647 - 0.5,
    );
    const f = new FFT(N);
    const out = f.createComplexArray();
    f.realTransform(out, x);
    for (let k = 0; k <= N / 2; k++) {
      let re = 0;
      let im = 0;
      for (let n = 0; n < N; n++) {
        re += x[n]! * Math.cos((2 * Math.PI * k * n) / N);
        im -= x[n]! * Math.sin((2 * Math.PI * k * n) / N);
      }
      expect(out[2 * k]).toBeCloseTo(re, 9);
      expect(out[2 * k + 1]).toBeCloseTo(im, 9);
    }
  });
});

describe('acceleration stage', () => {
  it('converts with the sensitivity and standard gravity (g = 9.80665 m/s^2, CGPM 1901)', () => {
    expect(STANDARD_GRAVITY_M_S2).toBe(9.80665);
    // 100 mV/g: 1 V is 10 g = 98 066.5 mm/s^2
    expect(mmPerS2PerVolt(100)).toBeCloseTo(98066.5, 6);
    expect(mmPerS2PerVolt(10.2)).toBeCloseTo(961436.27, 1);
  });

  it('removes DC without touching the AC part', () => {
    const st = new AccelerationStage(100, 1000);
    const x = Float32Array.from(
      { length: 1000 },
      (_, i) => 10 + 0.1 * Math.sin((2 * Math.PI * 5 * i) / 1000),
    );
    const out = new Float32Array(1000);
    st.process(x, out);
    expect(st.dcV).toBeCloseTo(10, 5);
    expect(out[250]!).toBeCloseTo(0.1 * 98066.5, 0);
    let m = 0;
    for (const v of out) m += v;
    expect(Math.abs(m / 1000)).toBeLessThan(1);
  });

  it('gives the same 1x with blocks shorter than a revolution (a serial board sends 10 ms frames)', async () => {
    const { Analyzer } = await import('../agent/dsp/analyzer.js');
    const { asBlocks, synthesize } = await import('./support/synth.js');
    const { testConfig } = await import('./support/config.js');
    const fs = 25600;
    const sig = synthesize({
      sampleRate: fs,
      seconds: 8,
      rpm: () => 1485,
      channels: [{ orders: [{ order: 1, velPk: 6, phaseDeg: 40 }], dcV: 10 }],
      tachChannel: 1,
    });
    for (const block of [256, 4096]) {
      const an = new Analyzer({
        config: testConfig([['DE-V', 0, 'DE', 'vertical']]),
        sampleRate: fs,
        channelCount: 2,
        maxBlock: 4096,
      });
      for (const b of asBlocks(sig, block)) an.push(b);
      const o = an.takeWindow().channels[0]!.orders['1']!;
      // Before the DC estimate moved to fixed 1 s spans, 256-sample blocks read 0.4-0.5 % low.
      // What remains is the first second, before the first span completes.
      expect(Math.abs(o.amp_pk_mm_s / 6 - 1)).toBeLessThan(0.002);
      expect(Math.abs(o.phase_deg - 40)).toBeLessThan(0.1);
    }
  });

  it('keeps raw statistics for sensor health: bias, r.m.s., clipping', () => {
    const s = new RawStats(5);
    s.add(Float32Array.from([11, 13, 11, 13]));
    s.add(Float32Array.from([5.5, -6]));
    expect(s.samples).toBe(6);
    expect(s.min).toBe(-6);
    expect(s.max).toBe(13);
    expect(s.clipped).toBe(6);
    const q = new RawStats(Infinity);
    q.add(Float32Array.from([11, 13, 11, 13]));
    expect(q.mean).toBeCloseTo(12, 10);
    expect(q.acRms).toBeCloseTo(1, 10);
  });
});

describe('tach', () => {
  function pulseTrain(
    fs: number,
    periods: number[],
    highV = 5,
    rise = 4,
  ): { x: Float32Array; marks: number[] } {
    // Linear rising ramps whose 50 % points (the marks) sit at known fractional sample times.
    const marks: number[] = [];
    let t = 100.37;
    for (const p of periods) (marks.push(t), (t += p));
    const x = new Float32Array(Math.ceil(t) + 200);
    for (const m of marks) {
      for (let i = Math.floor(m - rise); i < m + 60; i++) {
        const u = (i - (m - rise / 2)) / rise;
        x[i] = Math.max(x[i]!, highV * Math.min(1, Math.max(0, u)));
      }
    }
    return { x, marks };
  }

  it('times edges to a small fraction of a sample by interpolation', () => {
    const { x, marks } = pulseTrain(25600, [1000.25, 1001.5, 999.75, 1000.1]);
    const d = new TachDetector({ triggerV: 2.5, hysteresisV: 0.25, maxBlock: x.length });
    const n = d.process(x, 0);
    expect(n).toBe(marks.length);
    for (let i = 0; i < n; i++) expect(Math.abs(d.edges[i]! - marks[i]!)).toBeLessThan(1e-3);
  });

  it('finds the same edges when the signal is cut into odd blocks', () => {
    const { x, marks } = pulseTrain(25600, [1000, 1000, 1000, 1000, 1000]);
    const d = new TachDetector({ triggerV: 2.5, hysteresisV: 0.25, maxBlock: 1000 });
    const found: number[] = [];
    for (let i = 0; i < x.length; i += 333) {
      const n = d.process(x.subarray(i, Math.min(x.length, i + 333)), i);
      for (let k = 0; k < n; k++) found.push(d.edges[k]!);
    }
    expect(found.length).toBe(marks.length);
    found.forEach((t, i) => expect(Math.abs(t - marks[i]!)).toBeLessThan(1e-3));
  });

  it('hysteresis ignores ripple around the trigger level', () => {
    const x = Float32Array.from([0, 0, 3, 2.45, 2.6, 2.4, 2.7, 5, 5, 0, 0, 3, 5, 0]);
    const d = new TachDetector({ triggerV: 2.5, hysteresisV: 0.5, maxBlock: 64 });
    expect(d.process(x, 0)).toBe(2);
  });

  it('refuses pulses that keep coming faster than max_rpm instead of taking every other one', () => {
    // 1 kHz sampling, max 6000 r/min -> at least 10 samples per pulse; pulses every 6 samples.
    const edges = Array.from({ length: 40 }, (_, i) => i * 6);
    const { revs, t } = track(edges);
    expect(revs).toEqual([]);
    expect(t.tooFastPulses).toBeGreaterThan(15);
  });

  const track = (edges: number[], ppr = 1) => {
    const revs: Array<[number, number]> = [];
    const t = new RevolutionTracker(
      { pulsesPerRev: ppr, sampleRate: 1000, minRpm: 30, maxRpm: 6000 },
      (a, b) => revs.push([a, b]),
    );
    for (const e of edges) t.edge(e);
    return { revs, t };
  };

  it('never averages a missing pulse as one long revolution', () => {
    // 1000-sample revolutions (60 r/min at 1 kHz); the pulse at 5000 is missing.
    const { revs, t } = track([0, 1000, 2000, 3000, 4000, 6000, 7000, 8000]);
    for (const [a, b] of revs) expect(b - a).toBe(1000);
    // The first interval only serves as the reference until a second one confirms it.
    expect(revs.map((r) => r[0])).toEqual([1000, 2000, 3000, 6000, 7000]);
    expect(t.missingPulses).toBe(1);
    expect(t.revolutionsRejected).toBe(1);
  });

  it('does not trust a missing pulse hidden in the very first interval', () => {
    const { revs } = track([0, 2000, 3000, 4000, 5000]);
    for (const [a, b] of revs) expect(b - a).toBe(1000);
    expect(revs.length).toBeGreaterThan(0);
  });

  it('skips a double trigger and keeps the true revolution', () => {
    const { revs, t } = track([0, 1000, 2000, 2300, 3000, 4000]);
    expect(revs).toEqual([
      [1000, 2000],
      [2000, 3000],
      [3000, 4000],
    ]);
    expect(t.doubleTriggers).toBe(1);
  });

  it('does not average a revolution whose length jumps from the previous one', () => {
    const { revs, t } = track([0, 1000, 2000, 3000, 3750, 4750, 5750]);
    for (const [a, b] of revs) expect(b - a).toBe(1000);
    expect(t.unevenRevolutions).toBeGreaterThan(0);
  });

  it('groups pulses_per_rev pulses into one revolution', () => {
    const edges = Array.from({ length: 13 }, (_, i) => i * 250);
    const { revs } = track(edges, 4);
    expect(revs.length).toBeGreaterThanOrEqual(2);
    for (const [a, b] of revs) expect(b - a).toBe(1000);
  });
});

describe('synchronous averaging', () => {
  it('recovers amplitude and phase lag of orders from resampled revolutions', () => {
    // Revolutions of a non-integer length, so every one is resampled differently.
    const period = 1033.7;
    const n = Math.ceil(period * 12) + 10;
    const ring = new SampleRing(n + 10);
    const x = new Float32Array(n);
    for (let i = 0; i < n; i++) {
      const th = (2 * Math.PI * i) / period;
      x[i] =
        2 * Math.cos(th - (30 * Math.PI) / 180) + 0.5 * Math.cos(3 * th - (250 * Math.PI) / 180);
    }
    ring.write(x, 0);
    const avg = new SyncAverager(256);
    // From the second revolution on: each bin reads half a bin before its revolution's start.
    for (let r = 1; r < 11; r++) {
      const { from, to } = avg.reach(r * period, (r + 1) * period);
      expect(ring.holds(from, to)).toBe(true);
      avg.addRevolution(ring, r * period, (r + 1) * period);
    }
    const o1 = orderComponent(avg.sum, avg.revolutions, 1);
    const o3 = orderComponent(avg.sum, avg.revolutions, 3);
    expect(o1.amp).toBeCloseTo(2, 4);
    expect(o1.phaseDeg).toBeCloseTo(30, 2);
    expect(o3.amp).toBeCloseTo(0.5, 3);
    expect(o3.phaseDeg).toBeCloseTo(250, 1);
    expect(orderComponent(avg.sum, avg.revolutions, 2).amp).toBeLessThan(1e-4);
  });

  it('uses every sample: the 1x noise after 4 revolutions is what all 8192 samples allow, not 1024 points', () => {
    // 300 r/min at 10240 Hz: 2048 samples a revolution, 256 bins (8 samples a bin). White noise of
    // sigma only: the least-squares estimate of a sinusoid's in-phase amplitude from N samples of
    // white noise has a standard deviation of sigma * sqrt(2 / N) (textbook, e.g. Kay, Fundamentals
    // of Statistical Signal Processing: Estimation Theory, the sinusoidal amplitude example; from
    // memory). Reading 256 interpolated points a revolution instead would give about 2.3 x that
    // (1024 points, interpolation between two samples; own computation).
    const period = 2048.37;
    const revs = 4;
    const sigma = 1;
    const trials = 300;
    const rnd = gaussian(7);
    const ring = new SampleRing(16384);
    const x = new Float32Array(Math.ceil(period * (revs + 2)));
    const re: number[] = [];
    for (let t = 0; t < trials; t++) {
      for (let i = 0; i < x.length; i++) x[i] = sigma * rnd();
      ring.write(x, 0);
      const avg = new SyncAverager(256);
      for (let r = 1; r <= revs; r++) avg.addRevolution(ring, r * period, (r + 1) * period);
      const o = orderComponent(avg.sum, avg.revolutions, 1);
      re.push(o.amp * Math.cos((o.phaseDeg * Math.PI) / 180));
    }
    const mean = re.reduce((a, v) => a + v, 0) / trials;
    const sd = Math.sqrt(re.reduce((a, v) => a + (v - mean) ** 2, 0) / (trials - 1));
    const bound = sigma * Math.sqrt(2 / (revs * period));
    // 300 trials: the sample standard deviation is within about 8 % of the true one (2 sigma).
    expect(sd / bound).toBeGreaterThan(0.85);
    expect(sd / bound).toBeLessThan(1.15);
  });

  it('the bin mean gain at order k (sinc(k / points)) is divided out: order 20 of 64 bins reads true', () => {
    // 64 bins, order 20: the bins' moving average passes sinc(20 / 64) = 0.85 of it; orderComponent
    // restores that, and a centred bin adds no phase. What is left is the response of the linear
    // interpolation between samples, sinc^2(f / fs) (a triangle kernel; textbook): 20 cycles in
    // 1000.3 samples, 0.99868.
    const period = 1000.3;
    const ring = new SampleRing(8192);
    const x = new Float32Array(Math.ceil(period * 4));
    for (let i = 0; i < x.length; i++)
      x[i] = Math.cos((2 * Math.PI * 20 * i) / period - (70 * Math.PI) / 180);
    ring.write(x, 0);
    const avg = new SyncAverager(64);
    avg.addRevolution(ring, period, 2 * period);
    avg.addRevolution(ring, 2 * period, 3 * period);
    const o = orderComponent(avg.sum, avg.revolutions, 20);
    const u = (Math.PI * 20) / period;
    expect(o.amp).toBeCloseTo((Math.sin(u) / u) ** 2, 4);
    expect(o.phaseDeg).toBeCloseTo(70, 1);
  });

  it('wraps angles into 0-360', () => {
    expect(wrapDeg(-90)).toBe(270);
    expect(wrapDeg(720)).toBe(0);
    expect(wrapDeg(359.5)).toBe(359.5);
  });
});

describe('spectrum and integration to velocity', () => {
  it('velocity = acceleration / (2 pi f) for a tone (textbook relation)', () => {
    const fs = 2560;
    const N = 2048;
    const f = 80; // exactly on a line: 80 / 1.25
    const accelPk = 1000; // mm/s^2
    const sp = new SpectrumAccumulator(N);
    const x = Float32Array.from(
      { length: N * 4 },
      (_, i) => accelPk * Math.sin((2 * Math.PI * f * i) / fs),
    );
    sp.push(x);
    expect(sp.segments).toBe(4);
    const lines = velocityLinePower(sp.powerSum, sp.segments, N, sp.windowPower, fs);
    const rms = bandRms(lines, fs / N, 10, 1000);
    expect(rms).toBeCloseTo(accelPk / (2 * Math.PI * f) / Math.SQRT2, 3);
  });

  it('counts a tone between lines whole (window power correction)', () => {
    const fs = 2560;
    const N = 2048;
    const f = 123.4567;
    const sp = new SpectrumAccumulator(N);
    sp.push(
      Float32Array.from(
        { length: N * 8 },
        (_, i) => 500 * Math.cos((2 * Math.PI * f * i) / fs + 1),
      ),
    );
    const rms = bandRms(
      velocityLinePower(sp.powerSum, sp.segments, N, sp.windowPower, fs),
      fs / N,
      10,
      1000,
    );
    expect(Math.abs(rms / (500 / (2 * Math.PI * f) / Math.SQRT2) - 1)).toBeLessThan(0.005);
  });

  it('leaves out tones outside the band', () => {
    const fs = 25600;
    const N = 32768;
    const sp = new SpectrumAccumulator(N);
    sp.push(
      Float32Array.from(
        { length: N * 2 },
        (_, i) =>
          1000 * Math.sin((2 * Math.PI * 5 * i) / fs) +
          1000 * Math.sin((2 * Math.PI * 3200 * i) / fs),
      ),
    );
    const rms = bandRms(
      velocityLinePower(sp.powerSum, sp.segments, N, sp.windowPower, fs),
      fs / N,
      10,
      1000,
    );
    expect(rms).toBeLessThan(1e-3 * (1000 / (2 * Math.PI * 5)));
  });

  it('ISO 20816-3 band edges: 10-1000 Hz, 2-1000 Hz below 600 r/min', () => {
    // ISO 20816-3:2022, measurement band for broadband velocity on bearing housings.
    expect(isoBand(1485)).toEqual({ low: 10, high: 1000 });
    expect(isoBand(600)).toEqual({ low: 10, high: 1000 });
    expect(isoBand(590)).toEqual({ low: 2, high: 1000 });
  });

  it('plans the spectrum size from the line spacing and shortens it for short records', () => {
    expect(planSpectrumSize(25600, 1)).toBe(32768);
    expect(planSpectrumSize(25600, 0.25)).toBe(131072);
    expect(planSpectrumSize(25600, 1, 25600 * 2)).toBe(16384);
  });
});

describe('live vectors', () => {
  it('follow a step change within a few dozen revolutions while the window keeps the whole average', async () => {
    const { Analyzer } = await import('../agent/dsp/analyzer.js');
    const { asBlocks, synthesize } = await import('./support/synth.js');
    const { testConfig } = await import('./support/config.js');
    const fs = 25600;
    // 1x moves from 6 mm/s at 40 deg to 6 mm/s at 100 deg (a phase swing at constant amplitude) at
    // t = 6 s.
    const sig = synthesize({
      sampleRate: fs,
      seconds: 12,
      rpm: () => 1485,
      channels: [
        {
          orders: [
            { order: 1, velPk: 6, phaseDeg: 40, untilS: 6 },
            { order: 1, velPk: 6, phaseDeg: 100, fromS: 6 },
          ],
        },
      ],
      tachChannel: 1,
    });
    const an = new Analyzer({
      config: testConfig([['DE-V', 0, 'DE', 'vertical']]),
      sampleRate: fs,
      channelCount: 2,
      maxBlock: 1024,
      liveRevolutions: 16,
    });
    const phases: Array<[number, number]> = [];
    for (const b of asBlocks(sig, 1024)) {
      an.push(b);
      const f = an.liveFrame();
      if (f.speed_rpm) phases.push([f.sample_index / fs, f.channels[0]!.orders['1']!.phase_deg]);
    }
    const at = (t: number) => phases.find(([s]) => s >= t)![1];
    expect(Math.abs(at(5.9) - 40)).toBeLessThan(1);
    expect(Math.abs(at(6 + (6 * 16) / 24.75) - 100)).toBeLessThan(1.5); // six time constants later
    const w = an.takeWindow();
    // The window average of two equal vectors 60 deg apart: amplitude 6 cos 30 deg, phase 70 deg.
    expect(w.channels[0]!.orders['1']!.phase_deg).toBeCloseTo(70, 0);
    expect(w.channels[0]!.orders['1']!.amp_pk_mm_s).toBeCloseTo(6 * Math.cos(Math.PI / 6), 1);
  });
});
