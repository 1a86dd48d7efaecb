import { describe, expect, it } from 'vitest';
import FFT from 'fft.js';
import { Analyzer } from '../agent/dsp/analyzer.js';
import { mmPerS2PerVolt } from '../agent/dsp/acceleration.js';
import { asBlocks, synthesize } from './support/synth.js';
import { testConfig } from './support/config.js';

/**
 * Issue acceptance: 1x amplitude within 1 %, phase within 1 degree, overall within 2 %, on a record
 * with a slow +/-1 % speed drift, a 0.01 V DC offset, broadband noise, a strong 3.2 kHz component
 * (outside the band) and a non-synchronous tone inside the band.
 */
describe('measurement accuracy on a drifting, noisy record', () => {
  const fs = 25600;
  const seconds = 40;
  const rpm0 = 1485;
  const rpm = (t: number) => rpm0 * (1 + 0.01 * Math.sin((2 * Math.PI * t) / seconds));
  const noise = 500; // mm/s^2 standard deviation, white
  const de = {
    orders: [
      { order: 1, velPk: 6.0, phaseDeg: 40 },
      { order: 2, velPk: 0.35, phaseDeg: 75 },
      { order: 10, velPk: 0.3, phaseDeg: 200 },
    ],
    tones: [
      { freqHz: 37.3, velPk: 1.0 }, // non-synchronous, inside the band
      { freqHz: 3200, accelPk: 5 * 9806.65 }, // 5 g at 3.2 kHz, outside the band
    ],
    dcV: 0.01,
    noiseMmS2: noise,
  };
  const nde = { orders: [{ order: 1, velPk: 3.0, phaseDeg: 310 }], dcV: -0.01, noiseMmS2: noise };
  const signals = synthesize({
    sampleRate: fs,
    seconds,
    rpm,
    channels: [de, nde],
    tachChannel: 2,
    seed: 7,
  });
  const cfg = testConfig(
    [
      ['DE-V', 0, 'DE', 'vertical'],
      ['NDE-V', 1, 'NDE', 'vertical'],
    ],
    { blades: 10, ratedRpm: rpm0 },
  );
  const an = new Analyzer({ config: cfg, sampleRate: fs, channelCount: 3, maxBlock: 4096 });
  for (const b of asBlocks(signals, 4096)) an.push(b);
  const w = an.takeWindow();
  const [chDE, chNDE] = w.channels;

  // In-band mean square of white acceleration noise integrated to velocity:
  // PSD_a = 2 sigma^2 / fs (one-sided), PSD_v = PSD_a / (2 pi f)^2, integrated 10..1000 Hz.
  const noiseVelMs = ((2 * noise * noise) / fs / (4 * Math.PI * Math.PI)) * (1 / 10 - 1 / 1000);
  const expectOverall = (pks: number[]) =>
    Math.sqrt(pks.reduce((s, p) => s + (p * p) / 2, 0) + noiseVelMs);

  it('measures the speed and the ISO band', () => {
    expect(w.speed_rpm!).toBeGreaterThan(rpm0 * 0.995);
    expect(w.speed_rpm!).toBeLessThan(rpm0 * 1.005);
    expect(w.speed_max_rpm! / w.speed_min_rpm!).toBeGreaterThan(1.015); // the drift was seen
    expect(w.revolutions).toBeGreaterThan(980);
    // ISO 20816-3: 10-1000 Hz at or above 600 r/min
    expect(w.band_hz).toEqual({ low: 10, high: 1000 });
  });

  it('1x amplitude within 1 % and phase within 1 degree', () => {
    const one = chDE!.orders['1']!;
    expect(Math.abs(one.amp_pk_mm_s / 6.0 - 1)).toBeLessThan(0.01);
    expect(Math.abs(one.phase_deg - 40)).toBeLessThan(1);
    const n1 = chNDE!.orders['1']!;
    expect(Math.abs(n1.amp_pk_mm_s / 3.0 - 1)).toBeLessThan(0.01);
    expect(Math.abs(n1.phase_deg - 310)).toBeLessThan(1);
  });

  it('2x and blade-pass vectors', () => {
    const two = chDE!.orders['2']!;
    expect(Math.abs(two.amp_pk_mm_s / 0.35 - 1)).toBeLessThan(0.03);
    expect(Math.abs(two.phase_deg - 75)).toBeLessThan(3);
    const bp = chDE!.orders['10']!;
    expect(Math.abs(bp.amp_pk_mm_s / 0.3 - 1)).toBeLessThan(0.03);
    expect(Math.abs(bp.phase_deg - 200)).toBeLessThan(3);
  });

  it('overall velocity r.m.s. 10-1000 Hz within 2 %, ignoring 3.2 kHz and DC', () => {
    const want = expectOverall([6.0, 0.35, 0.3, 1.0]);
    expect(Math.abs(chDE!.overall_rms_mm_s! / want - 1)).toBeLessThan(0.02);
    const wantNde = expectOverall([3.0]);
    expect(Math.abs(chNDE!.overall_rms_mm_s! / wantNde - 1)).toBeLessThan(0.02);
    expect(chDE!.one_x_share!).toBeCloseTo(6.0 / Math.SQRT2 / want, 2);
  });

  it('finds the non-synchronous tone and not the orders', () => {
    const p = chDE!.nonsync_peaks[0]!;
    expect(Math.abs(p.freq_hz - 37.3)).toBeLessThan(0.3);
    expect(Math.abs(p.amp_rms_mm_s / (1.0 / Math.SQRT2) - 1)).toBeLessThan(0.05);
    for (const q of chDE!.nonsync_peaks)
      expect(Math.abs(q.order - Math.round(q.order))).toBeGreaterThan(0.02);
  });

  it('a plain FFT peak over the whole record misses the limits under the drift', () => {
    // The reason for synchronous averaging: one long FFT smears the drifting 1x over many lines.
    const v = signals[0]!;
    const n = v.length;
    const N = 1 << 21;
    const x = new Float64Array(N);
    let mean = 0;
    for (let i = 0; i < n; i++) mean += v[i]!;
    mean /= n;
    const k = mmPerS2PerVolt(100);
    let sw = 0;
    for (let i = 0; i < n; i++) {
      const wgt = 0.5 - 0.5 * Math.cos((2 * Math.PI * i) / n);
      x[i] = (v[i]! - mean) * k * wgt;
      sw += wgt;
    }
    const f = new FFT(N);
    const out = f.createComplexArray();
    f.realTransform(out, x);
    const df = fs / N;
    let best = 0;
    let bestK = 0;
    for (let b = Math.floor(23 / df); b <= Math.ceil(26.5 / df); b++) {
      const m = Math.hypot(out[2 * b]!, out[2 * b + 1]!);
      if (m > best) ((best = m), (bestK = b));
    }
    const accelPk = (2 * best) / sw;
    const velPk = accelPk / (2 * Math.PI * bestK * df);
    const err = Math.abs(velPk / 6.0 - 1);
    expect(err).toBeGreaterThan(0.01); // outside the 1 % the synchronous average meets
    // ... while the synchronous average met it on the same samples (test above).
    expect(Math.abs(chDE!.orders['1']!.amp_pk_mm_s / 6.0 - 1)).toBeLessThan(0.01);
  });
});

/**
 * The reported r.m.s. of a 1x sine, checked against the r.m.s. computed from the samples
 * themselves: the synthesized acceleration integrated to velocity (trapezoidal rule) over whole
 * revolutions, its mean removed. Textbook identity: a sine of peak V has r.m.s. V / sqrt(2).
 */
describe('1x r.m.s. against the velocity r.m.s. computed from the samples', () => {
  const fs = 25600;
  const rpm = 1485;
  const velPk = 4.0;
  const sig = synthesize({
    sampleRate: fs,
    seconds: 10,
    rpm: () => rpm,
    channels: [{ orders: [{ order: 1, velPk, phaseDeg: 250 }], dcV: 0.02 }],
    tachChannel: 1,
  });
  const cfg = testConfig([['DE-V', 0, 'DE', 'vertical']], { ratedRpm: rpm });
  const an = new Analyzer({
    config: cfg,
    sampleRate: fs,
    channelCount: 2,
    maxBlock: 4096,
    totalSamples: sig[0]!.length,
  });
  for (const b of asBlocks(sig, 4096)) an.push(b);
  const ch = an.takeWindow().channels[0]!;

  // Velocity r.m.s. straight from the samples, independent of the analyzer.
  const period = (60 * fs) / rpm; // samples per revolution
  // whole revolutions (to 0.5 sample)
  const n = Math.round(Math.floor(sig[0]!.length / period - 1) * period);
  const k = mmPerS2PerVolt(100);
  const a = (i: number) => (sig[0]![i]! - 0.02) * k;
  const v = new Float64Array(n);
  for (let i = 1; i < n; i++) v[i] = v[i - 1]! + (a(i - 1) + a(i)) / (2 * fs);
  let mean = 0;
  for (let i = 0; i < n; i++) mean += v[i]!;
  mean /= n;
  let ms = 0;
  for (let i = 0; i < n; i++) ms += (v[i]! - mean) ** 2;
  const rmsFromSamples = Math.sqrt(ms / n);

  it('the samples carry a sine of the stated peak (r.m.s. = peak / sqrt 2, textbook identity)', () => {
    expect(Math.abs(rmsFromSamples / (velPk / Math.SQRT2) - 1)).toBeLessThan(0.002);
  });

  it('the reported 1x peak / sqrt 2 and the reported 1x r.m.s. match it within 1 %', () => {
    const one = ch.orders['1']!;
    expect(Math.abs(one.amp_pk_mm_s / Math.SQRT2 / rmsFromSamples - 1)).toBeLessThan(0.01);
    expect(Math.abs(one.amp_rms_mm_s / rmsFromSamples - 1)).toBeLessThan(0.01);
  });

  it('the overall r.m.s. of this pure tone in the band matches it within 2 %', () => {
    expect(Math.abs(ch.overall_rms_mm_s! / rmsFromSamples - 1)).toBeLessThan(0.02);
    expect(Math.abs(ch.one_x_share! - 1)).toBeLessThan(0.02);
  });
});
