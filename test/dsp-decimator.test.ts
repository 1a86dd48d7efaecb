import { describe, expect, it } from 'vitest';
import {
  Decimator,
  DecimatorPlan,
  designHalfBand,
  equirippleHalfBandTaps,
  type SampleSink,
} from '../agent/dsp/decimate.js';
import { Analyzer } from '../agent/dsp/analyzer.js';
import { bandRms, SpectrumAccumulator, velocityLinePower } from '../agent/dsp/spectrum.js';
import { asBlocks, gaussian, synthesize } from './support/synth.js';
import { testConfig } from './support/config.js';

/**
 * The decimator ahead of the spectrum, checked against facts from outside the project: the DTFT
 * definition H(f) = sum_n h[n] e^{-2 pi i f n / fs}, computed here independently of the product's
 * own design code; the defining properties of a half-band filter; aliasing by sampling; and the
 * analytic power of white noise.
 */

const G = 9806.65; // mm/s^2 per g (standard gravity, 3rd CGPM 1901)

/** DTFT of the taps at frequency f (fs = sample rate), straight from the definition. */
function dtft(h: Float64Array, f: number, fs: number): { re: number; im: number } {
  let re = 0;
  let im = 0;
  for (let n = 0; n < h.length; n++) {
    re += h[n]! * Math.cos((2 * Math.PI * f * n) / fs);
    im -= h[n]! * Math.sin((2 * Math.PI * f * n) / fs);
  }
  return { re, im };
}
const mag = (h: Float64Array, f: number, fs: number) =>
  Math.hypot(dtft(h, f, fs).re, dtft(h, f, fs).im);

/** Collects everything a decimator outputs. */
class Collect implements SampleSink {
  private parts: number[] = [];
  push(x: Float32Array | Float64Array, length: number): void {
    for (let i = 0; i < length; i++) this.parts.push(x[i]!);
  }
  get values(): Float64Array {
    return Float64Array.from(this.parts);
  }
}

function decimateAll(
  plan: DecimatorPlan,
  x: Float32Array | Float64Array,
  blocks: number[] = [x.length],
): Float64Array {
  const d = new Decimator(plan);
  const sink = new Collect();
  let i = 0;
  for (let b = 0; i < x.length; b++) {
    const n = Math.min(blocks[b % blocks.length]!, x.length - i);
    d.process(x.subarray(i, i + n), n, sink);
    i += n;
  }
  return sink.values;
}

/**
 * Least-squares amplitude of a tone of known frequency f in y (sample rate fs): fits a cos + b sin.
 */
function toneAmplitude(y: Float64Array, f: number, fs: number, from = 0): number {
  let cc = 0;
  let ss = 0;
  let cs = 0;
  let yc = 0;
  let ys = 0;
  for (let m = from; m < y.length; m++) {
    const cycles = ((f * m) % fs) / fs; // reduced first: exact for whole-Hz f, keeps cos accurate
    const c = Math.cos(2 * Math.PI * cycles);
    const s = Math.sin(2 * Math.PI * cycles);
    cc += c * c;
    ss += s * s;
    cs += c * s;
    yc += y[m]! * c;
    ys += y[m]! * s;
  }
  const det = cc * ss - cs * cs;
  return Math.hypot((yc * ss - ys * cs) / det, (ys * cc - yc * cs) / det);
}

describe('half-band stages for 25.6 kHz and the 10-1000 Hz band', () => {
  const plan = new DecimatorPlan(25600, 1000, 2560);

  it('three stages bring 25.6 kHz down to 3.2 kHz, with the stopband where aliases into the band begin', () => {
    expect(plan.stages.map((s) => s.inputRateHz)).toEqual([25600, 12800, 6400]);
    expect(plan.outputRateHz).toBe(3200);
    expect(plan.factor).toBe(8);
    // Sampling at r/2 folds f onto r/2 - f, which is inside [0, 1000] Hz from f = r/2 - 1000 Hz up.
    expect(plan.stages.map((s) => s.stopbandEdgeHz)).toEqual([11800, 5400, 2200]);
  });

  it('has the structure of a half-band filter: centre tap 1/2, every second tap 0, symmetric (Vaidyanathan, Multirate Systems and Filter Banks, 1993, sec. 4.6, from memory)', () => {
    for (const s of plan.stages) {
      const h = s.taps;
      const c = (h.length - 1) / 2;
      expect((h.length + 1) % 4).toBe(0);
      expect(h[c]).toBe(0.5);
      for (let m = 2; m <= c; m += 2) {
        expect(h[c + m]).toBe(0);
        expect(h[c - m]).toBe(0);
      }
      for (let m = 1; m <= c; m += 2) expect(h[c + m]).toBe(h[c - m]);
      // Gain 1 at DC and 0 at the input's Nyquist frequency (which folds onto DC), within the
      // ripple.
      expect(Math.abs(h.reduce((a, b) => a + b, 0) - 1)).toBeLessThanOrEqual(1e-6);
      expect(mag(h, s.inputRateHz / 2, s.inputRateHz)).toBeLessThanOrEqual(1e-6);
    }
  });

  it('meets the design on a dense grid of its DTFT: passband ripple <= 1e-6, stopband >= 120 dB', () => {
    for (const s of plan.stages) {
      const r = s.inputRateHz;
      const c = (s.taps.length - 1) / 2;
      let ripple = 0;
      let stop = 0;
      const pts = 20000;
      for (let i = 0; i <= pts; i++) {
        const fp = (s.passbandEdgeHz * i) / pts;
        // Linear phase: H(f) = A(f) e^{-2 pi i f c / r}; A is the real amplitude.
        const hp = dtft(s.taps, fp, r);
        const ap =
          hp.re * Math.cos((2 * Math.PI * fp * c) / r) -
          hp.im * Math.sin((2 * Math.PI * fp * c) / r);
        ripple = Math.max(ripple, Math.abs(ap - 1));
        const fs = s.stopbandEdgeHz + ((r / 2 - s.stopbandEdgeHz) * i) / pts;
        stop = Math.max(stop, mag(s.taps, fs, r));
        // Half-band symmetry A(f) + A(r/2 - f) = 1 (same source).
        const hs = dtft(s.taps, r / 2 - fp, r);
        const as =
          hs.re * Math.cos((2 * Math.PI * (r / 2 - fp) * c) / r) -
          hs.im * Math.sin((2 * Math.PI * (r / 2 - fp) * c) / r);
        expect(Math.abs(ap + as - 1)).toBeLessThan(1e-12);
      }
      expect(ripple).toBeLessThanOrEqual(1e-6);
      expect(-20 * Math.log10(stop)).toBeGreaterThanOrEqual(120);
      // The design reports what it reached, and that is what the DTFT shows.
      expect(Math.abs(s.ripple / Math.max(ripple, stop) - 1)).toBeLessThan(0.02);
    }
  });

  /** Extrema of A(f) - 1 over [0, edge] on a dense grid (own DTFT), as signed values in order. */
  const passbandExtrema = (h: Float64Array, rate: number, edge: number): number[] => {
    const c = (h.length - 1) / 2;
    const pts = 20000;
    const e = Array.from({ length: pts + 1 }, (_, i) => {
      const f = (edge * i) / pts;
      const H = dtft(h, f, rate);
      return (
        H.re * Math.cos((2 * Math.PI * f * c) / rate) -
        H.im * Math.sin((2 * Math.PI * f * c) / rate) -
        1
      );
    });
    return e.filter(
      (v, i) =>
        (i === 0 || Math.abs(v) >= Math.abs(e[i - 1]!)) &&
        (i === pts || Math.abs(v) >= Math.abs(e[i + 1]!)),
    );
  };
  /** Count of sign alternations among the extrema whose size is within 1 % of the largest. */
  const alternations = (ext: number[]): number => {
    const top = Math.max(...ext.map(Math.abs));
    const big = ext.filter((v) => Math.abs(v) >= 0.99 * top);
    return big.filter((v, i) => i === 0 || Math.sign(v) !== Math.sign(big[i - 1]!)).length;
  };

  it('is equiripple, hence the best its length allows, and one tap pair fewer misses the spec (alternation theorem: Parks & McClellan, IEEE Trans. Circuit Theory CT-19, 1972)', () => {
    for (const s of plan.stages) {
      const k = (s.taps.length + 1) / 4;
      // An error that reaches its maximum with alternating signs at K+1 frequencies is minimax.
      expect(
        alternations(passbandExtrema(s.taps, s.inputRateHz, s.passbandEdgeHz)),
      ).toBeGreaterThanOrEqual(k + 1);
      // The same for K-1 pairs: the best any shorter half-band can do, and it is not good enough.
      const shorter = equirippleHalfBandTaps(k - 1, s.passbandEdgeHz / s.inputRateHz)!.taps;
      const ext = passbandExtrema(shorter, s.inputRateHz, s.passbandEdgeHz);
      expect(alternations(ext)).toBeGreaterThanOrEqual(k);
      expect(Math.max(...ext.map(Math.abs))).toBeGreaterThan(1e-6);
    }
  });

  it('refuses a passband that leaves no transition band', () => {
    expect(() => designHalfBand(3200, 1000)).toThrow(
      /passband edge must be below a quarter of the input rate/,
    );
  });
});

describe('one stage: its output is the designed response, sample for sample', () => {
  // One stage: 6400 Hz in, 3200 Hz out, passband 0-1000 Hz, stopband 2200-3200 Hz.
  const plan = new DecimatorPlan(6400, 1000, 2560);
  const s = plan.stages[0]!;
  const h = s.taps;
  const L = h.length;
  const n = 6400;

  for (const f of [13, 250, 999, 1500, 2201, 2900, 3190]) {
    it(`a ${f} Hz tone comes out as Re(H(f) e^(i 2 pi f t)) with H the DTFT of the taps`, () => {
      const phi = 0.7;
      // Whole-Hz frequencies: the phase is reduced modulo one cycle exactly before the cosine.
      const x = Float64Array.from({ length: n }, (_, i) =>
        Math.cos((2 * Math.PI * ((f * i) % 6400)) / 6400 + phi),
      );
      const y = decimateAll(plan, x, [1000, 17, 333]);
      expect(y.length).toBe(Math.floor((n - L) / 2) + 1);
      // Output m is the FIR output at input index 2m + L - 1: y = Re(H
      // e^{i (w (2m + L - 1) + phi)}).
      const H = dtft(h, f, 6400);
      let worst = 0;
      for (let m = 0; m < y.length; m++) {
        const a = (2 * Math.PI * ((f * (2 * m + L - 1)) % 6400)) / 6400 + phi;
        worst = Math.max(worst, Math.abs(y[m]! - (H.re * Math.cos(a) - H.im * Math.sin(a))));
      }
      expect(worst).toBeLessThan(1e-12);
      // And the measured amplitude of the (possibly aliased) output tone is |H(f)|.
      const fOut = f < 1600 ? f : 3200 - f;
      const amp = toneAmplitude(y, fOut, 3200);
      expect(Math.abs(amp - Math.hypot(H.re, H.im))).toBeLessThan(1e-12);
      if (f <= 1000) expect(Math.abs(amp - 1)).toBeLessThanOrEqual(1e-6);
      if (f >= 2200) expect(amp).toBeLessThanOrEqual(1e-6);
    });
  }
});

describe('the whole cascade at 25.6 kHz', () => {
  const fs = 25600;
  const plan = new DecimatorPlan(fs, 1000, 2560);
  const seconds = 4;
  const tone = (f: number, amp = 1) =>
    Float64Array.from(
      { length: fs * seconds },
      (_, i) => amp * Math.sin((2 * Math.PI * f * i) / fs + 0.3),
    );

  it('passes the band with the gain the stage designs predict, within 3e-6 of 1', () => {
    for (const f of [2, 10, 24.75, 100, 500, 997.3, 1000]) {
      const y = decimateAll(plan, tone(f));
      // Expected gain: product of each stage's |H| (DTFT) at f, each at its own rate.
      const want = plan.stages.reduce((g, s) => g * mag(s.taps, f, s.inputRateHz), 1);
      const got = toneAmplitude(y, f, 3200);
      expect(Math.abs(got - want)).toBeLessThan(1e-9);
      expect(Math.abs(got - 1)).toBeLessThanOrEqual(3e-6);
    }
  });

  const spectrumBandRms = (y: Float64Array, rate: number) => {
    const N = 4096;
    const sp = new SpectrumAccumulator(N);
    sp.push(y, y.length);
    const lines = velocityLinePower(sp.powerSum, sp.segments, N, sp.windowPower, rate);
    return bandRms(lines, rate / N, 10, 1000);
  };

  for (const limit of [11800, 5400, 2200]) {
    it(`keeps a 10 g tone 10 Hz above the ${limit} Hz aliasing limit out of the band`, () => {
      const f = limit + 10; // folds onto 990 Hz, inside the band
      const amp = 10 * G;
      const x = tone(f, amp);
      const fold = 990;
      // Without a filter, taking every 8th sample puts the whole tone at 990 Hz (sampling theorem):
      const naive = Float64Array.from({ length: x.length / 8 }, (_, m) => x[8 * m]!);
      const naiveVel = spectrumBandRms(naive, 3200);
      expect(Math.abs(naiveVel / (amp / (2 * Math.PI * fold) / Math.SQRT2) - 1)).toBeLessThan(0.01);
      // Through the cascade at most 1e-6 of it is left (120 dB), plus nothing else.
      const y = decimateAll(plan, x);
      const vel = spectrumBandRms(y, 3200);
      // (design bounds: stopband gain <= 1e-6 in the stage that folds it, passband gain <= 1 + 1e-6
      // in the others)
      expect(vel).toBeLessThan((1e-6 * (1 + 1e-6) ** 2 * amp) / (2 * Math.PI * fold) / Math.SQRT2);
      expect(vel).toBeLessThan(1e-5); // mm/s, against about 11 mm/s without the filter
    });
  }

  it('produces as many outputs as it says, whatever the block sizes, and carries its state across blocks', () => {
    let seed = 11;
    const x = Float32Array.from(
      { length: 50000 },
      () => (seed = (seed * 16807) % 2147483647) / 2147483647 - 0.5,
    );
    const whole = decimateAll(plan, x);
    expect(whole.length).toBe(plan.outputsFor(x.length));
    for (const blocks of [[1], [7, 4096, 3], [333, 1, 5000, 2], [65536]])
      expect(decimateAll(plan, x, blocks)).toEqual(whole);
  });

  it('after reset, starts again from the new samples only', () => {
    const a = tone(50, 1000).subarray(0, 20000);
    const b = tone(300, 1000).subarray(0, 30000);
    const d = new Decimator(plan);
    d.process(a, a.length, new Collect());
    d.reset();
    const after = new Collect();
    d.process(b, b.length, after);
    expect(after.values).toEqual(decimateAll(plan, b));
  });
});

describe('band-limited white noise: the overall equals the analytic value', () => {
  // White acceleration noise, standard deviation sigma, at 25.6 kHz: one-sided PSD 2 sigma^2 / fs,
  // flat; as velocity, PSD / (2 pi f)^2 (textbook relations). Through the cascade the band keeps
  // that PSD while the 7/8 of the noise power above 1.6 kHz must neither show up nor fold in.
  const fs = 25600;
  const sigma = 1000; // mm/s^2
  const seconds = 200;
  const plan = new DecimatorPlan(fs, 1000, 2560);
  const N = 4096;
  const rate = plan.outputRateHz;
  const df = rate / N;
  const sp = new SpectrumAccumulator(N);
  const d = new Decimator(plan);
  const rnd = gaussian(5);
  const block = new Float32Array(4096);
  for (let done = 0; done < fs * seconds; done += block.length) {
    for (let i = 0; i < block.length; i++) block[i] = sigma * rnd();
    d.process(block, block.length, sp);
  }
  const vel = velocityLinePower(sp.powerSum, sp.segments, N, sp.windowPower, rate);
  const k0 = Math.ceil(10 / df);
  const k1 = Math.floor(1000 / df);
  const lineMs = (2 * sigma * sigma * df) / fs; // expected acceleration mean square per line
  // Spread of an average of S Hann periodograms: each line's power is chi-square with 2S degrees of
  // freedom (relative variance 1/S); neighbouring lines are correlated through the window: for
  // white noise the correlation of bins k and k+m is the DFT of w^2 at m over its value at 0, for
  // Hann (3/8, -1/4, 1/16) N -> rho = -2/3 and 1/6, and the powers correlate as rho^2 (complex
  // Gaussian bins). A smooth weighted sum therefore has about 1 + 2 (4/9 + 1/36) = 1.94 times the
  // variance of independent lines. The tolerances below are 4 such standard deviations of the band
  // power.
  const relSd = (weights: number[]) => {
    const s1 = weights.reduce((a, b) => a + b, 0);
    const s2 = weights.reduce((a, b) => a + b * b, 0);
    return Math.sqrt((1.94 * s2) / (s1 * s1) / sp.segments);
  };
  const ks = Array.from({ length: k1 - k0 + 1 }, (_, i) => k0 + i);

  it('averaged enough segments for a tight check', () => {
    expect(sp.segments).toBe(Math.floor(plan.outputsFor(fs * seconds) / N));
    expect(sp.segments).toBeGreaterThan(150);
  });

  it('acceleration r.m.s. in the band: sigma sqrt(2 B / fs)', () => {
    // = 2 sigma^2 B / fs over the B = (k1 - k0 + 1) df the lines cover
    const want = lineMs * ks.length;
    let got = 0;
    for (const k of ks) got += vel[k]! * (2 * Math.PI * k * df) ** 2;
    const tol = 4 * relSd(ks.map(() => 1));
    expect(tol).toBeLessThan(0.015);
    expect(Math.abs(got / want - 1)).toBeLessThan(tol);
  });

  it('velocity overall 10-1000 Hz: the PSD / (2 pi f)^2 integrated over the band', () => {
    // The lines with centres in [10, 1000] Hz cover [f_k0 - df/2, f_k1 + df/2]:
    // integral of (2 sigma^2 / fs) / (2 pi f)^2 df = (2 sigma^2 / fs) / (4 pi^2) (1/f_lo - 1/f_hi).
    const fLo = k0 * df - df / 2;
    const fHi = k1 * df + df / 2;
    const wantMs = ((2 * sigma * sigma) / fs / (4 * Math.PI * Math.PI)) * (1 / fLo - 1 / fHi);
    const got = bandRms(vel, df, 10, 1000);
    const tol = 4 * relSd(ks.map((k) => 1 / (k * k)));
    expect(tol).toBeLessThan(0.08);
    // Folding the 7/8 of the noise power above the band into it would read 8 times too high.
    expect(Math.abs((got * got) / wantMs - 1)).toBeLessThan(tol);
  });
});

describe('the analyzer with decimation', () => {
  it('chooses the stages from the sample rate and the band edge', () => {
    const stages = (fs: number, high = 1000) => new DecimatorPlan(fs, high, 2.56 * high);
    expect(stages(25600).stages.length).toBe(3);
    expect(stages(51200).outputRateHz).toBe(3200);
    expect(stages(48000).outputRateHz).toBe(3000);
    expect(stages(25600, 500).outputRateHz).toBe(1600);
    expect(stages(5120).outputRateHz).toBe(2560);
    expect(stages(3200).stages.length).toBe(0);
    // No stage: the samples go to the spectrum unchanged.
    const x = Float64Array.from({ length: 100 }, (_, i) => Math.sin(i));
    expect(decimateAll(stages(3200), x, [33])).toEqual(x);
  });

  const fs = 25600;
  const cfg = testConfig([['DE-V', 0, 'DE', 'vertical']], { ratedRpm: 1485 });

  it('keeps the line spacing asked for, and two whole segments on short records', () => {
    const an = new Analyzer({ config: cfg, sampleRate: fs, channelCount: 2 });
    expect(an.spectrumRate).toBe(3200);
    expect(an.spectrumRate / an.spectrumSize).toBe(0.78125);
    const short = new Analyzer({
      config: cfg,
      sampleRate: fs,
      channelCount: 2,
      totalSamples: 2 * fs,
    });
    expect(short.spectrumRate / short.spectrumSize).toBe(1.5625);
    expect(
      new DecimatorPlan(fs, 1000, 2560).outputsFor(2 * fs) / short.spectrumSize,
    ).toBeGreaterThanOrEqual(2);
  });

  it('restarts the filters after a gap and still measures the overall within 2 %', () => {
    const cut = 10 * fs + 1234; // samples [cut, cut + lost) never arrive
    const lost = 3 * fs;
    // The stretch after the gap is 10 outputs short of two 4096-point segments once the restarted
    // filters have filled; filters that kept their history would deliver two.
    const plan = new DecimatorPlan(fs, 1000, 2560);
    const after = plan.startupSamples + 1 + 8 * (2 * 4096 - 10 - 1);
    const total = cut + lost + after;
    const sig = synthesize({
      sampleRate: fs,
      seconds: total / fs,
      rpm: () => 1485,
      channels: [
        {
          orders: [{ order: 1, velPk: 6, phaseDeg: 40 }],
          tones: [{ freqHz: 3200, accelPk: 5 * G }],
          noiseMmS2: 300,
        },
      ],
      tachChannel: 1,
      seed: 3,
    });
    const an = new Analyzer({ config: cfg, sampleRate: fs, channelCount: 2, maxBlock: 4096 });
    for (const b of asBlocks(sig, 4096)) {
      const start = b.startIndex;
      const end = start + b.channels[0]!.length;
      if (end <= cut || start >= cut + lost) {
        an.push(b);
        continue;
      }
      // Split the block around the lost stretch, announcing the gap as a source would.
      if (start < cut)
        an.push({
          kind: 'samples',
          startIndex: start,
          channels: b.channels.map((c) => c.subarray(0, cut - start)),
        });
      if (end > cut + lost) {
        if (start <= cut + lost)
          an.push({ kind: 'gap', fromIndex: cut, toIndex: cut + lost, reason: 'test' });
        an.push({
          kind: 'samples',
          startIndex: cut + lost,
          channels: b.channels.map((c) => c.subarray(cut + lost - start)),
        });
      }
    }
    const w = an.takeWindow();
    expect(w.gap_samples).toBe(lost);
    // Each contiguous stretch is decimated on its own (filters restarted, partial segment dropped).
    const N = an.spectrumSize;
    expect(N).toBe(4096);
    expect(plan.outputsFor(after)).toBe(2 * N - 10);
    expect(w.spectrum_segments).toBe(Math.floor(plan.outputsFor(cut) / N) + 1);
    // 6 mm/s pk at 1x, plus white noise: (2 sigma^2 / fs) / (4 pi^2) (1/10 - 1/1000) (textbook
    // relations).
    const noiseMs = ((2 * 300 * 300) / fs / (4 * Math.PI * Math.PI)) * (1 / 10 - 1 / 1000);
    const want = Math.sqrt(18 + noiseMs);
    expect(Math.abs(w.channels[0]!.overall_rms_mm_s! / want - 1)).toBeLessThan(0.02);
  });
});
