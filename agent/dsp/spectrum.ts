import FFT from 'fft.js';
import type { SampleSink } from './decimate.js';

/**
 * Stage 3: averaged power spectrum (fft.js, Hann window, non-overlapping segments) of the
 * acceleration, and from it the velocity spectrum, the overall velocity r.m.s. in a band and the
 * non-synchronous peaks. The analyzer feeds it the acceleration decimated to a few kHz
 * (decimate.ts), so `sampleRate` below is the decimated rate.
 *
 * Integration to velocity is done in the frequency domain (divide each line by 2*pi*f): exact at
 * every frequency in the band, with no integrator drift and no filter phase. The overall r.m.s. is
 * the band-limited sum of the velocity power by Parseval's theorem, corrected for the window's
 * power (sum of w^2), so a tone's energy is counted whole whichever lines it leaks into.
 */

/**
 * What every channel's accumulator of one size shares: the FFT (fft.js keeps its tables in the
 * instance, so one per size), the Hann window and the transform's output scratch.
 */
export class SpectrumPlan {
  readonly fft: FFT;
  readonly window: Float64Array;
  /** Sum of squared window weights. */
  readonly windowPower: number;
  readonly out: Float64Array;

  constructor(readonly size: number) {
    if (size < 16 || (size & (size - 1)) !== 0)
      throw new Error(`spectrum size must be a power of two >= 16, got ${size}`);
    this.window = new Float64Array(size);
    let s2 = 0;
    for (let n = 0; n < size; n++) {
      // Periodic Hann window.
      const w = 0.5 - 0.5 * Math.cos((2 * Math.PI * n) / size);
      this.window[n] = w;
      s2 += w * w;
    }
    this.windowPower = s2;
    this.out = new Float64Array(2 * size);
    this.fft = new FFT(size);
  }
}

export class SpectrumAccumulator implements SampleSink {
  readonly size: number;
  /** Sum over segments of |X_k|^2, k = 0..size/2. */
  readonly powerSum: Float64Array;
  segments = 0;
  private readonly seg: Float64Array;
  private readonly plan: SpectrumPlan;
  private fill = 0;

  constructor(planOrSize: SpectrumPlan | number) {
    this.plan = typeof planOrSize === 'number' ? new SpectrumPlan(planOrSize) : planOrSize;
    this.size = this.plan.size;
    this.seg = new Float64Array(this.size);
    this.powerSum = new Float64Array(this.size / 2 + 1);
  }

  /** Sum of squared window weights. */
  get windowPower(): number {
    return this.plan.windowPower;
  }

  push(x: Float32Array | Float64Array, length = x.length): void {
    const seg = this.seg;
    const w = this.plan.window;
    const N = this.size;
    let i = 0;
    while (i < length) {
      const run = Math.min(length - i, N - this.fill);
      let f = this.fill;
      // The window is applied while copying.
      for (let j = 0; j < run; j++, f++) seg[f] = x[i + j]! * w[f]!;
      this.fill = f;
      i += run;
      if (f === N) this.transformSegment();
    }
  }

  private transformSegment(): void {
    const { fft, out } = this.plan;
    fft.realTransform(out, this.seg);
    const p = this.powerSum;
    const half = this.size / 2;
    for (let k = 0; k <= half; k++) {
      const re = out[2 * k]!;
      const im = out[2 * k + 1]!;
      p[k] = p[k]! + re * re + im * im;
    }
    this.segments++;
    this.fill = 0;
  }

  /** Drop a partly filled segment (after a gap). */
  discardPartial(): void {
    this.fill = 0;
  }

  resetSums(): void {
    this.powerSum.fill(0);
    this.segments = 0;
  }
}

/**
 * Mean-square velocity per spectral line, (mm/s)^2, from summed acceleration power in (mm/s^2)^2.
 * Line k holds the mean square that falls in [f_k - df/2, f_k + df/2]; DC is 0.
 */
export function velocityLinePower(
  powerSum: Float64Array,
  segments: number,
  size: number,
  windowPower: number,
  sampleRate: number,
): Float64Array {
  const out = new Float64Array(powerSum.length);
  if (segments === 0) return out;
  const df = sampleRate / size;
  const c = 2 / (size * windowPower * segments);
  for (let k = 1; k < powerSum.length; k++) {
    const w = 2 * Math.PI * k * df;
    const onesided = k === size / 2 ? c / 2 : c;
    out[k] = (onesided * powerSum[k]!) / (w * w);
  }
  return out;
}

/** r.m.s. over the lines whose centre frequency lies in [low, high] Hz. */
export function bandRms(linePower: Float64Array, df: number, low: number, high: number): number {
  const k0 = Math.max(1, Math.ceil(low / df - 1e-9));
  const k1 = Math.min(linePower.length - 1, Math.floor(high / df + 1e-9));
  let s = 0;
  for (let k = k0; k <= k1; k++) s += linePower[k]!;
  return Math.sqrt(s);
}

export interface Peak {
  freqHz: number;
  rms: number;
}

/**
 * Local maxima of the line power in [low, high] Hz whose frequency is not within `tolHz(h)` of a
 * whole order h of `runFreqHz`, largest first. A peak's r.m.s. sums the power of its Hann main lobe
 * (+/-2 lines); its frequency is the power-weighted centre of that lobe.
 */
export function nonSynchronousPeaks(
  linePower: Float64Array,
  df: number,
  low: number,
  high: number,
  runFreqHz: number | null,
  tolHz: (order: number) => number,
  minRms: number,
  maxPeaks: number,
): Peak[] {
  const k0 = Math.max(3, Math.ceil(low / df));
  const k1 = Math.min(linePower.length - 3, Math.floor(high / df));
  const found: Peak[] = [];
  for (let k = k0; k <= k1; k++) {
    const p = linePower[k]!;
    if (!(
      p > linePower[k - 1]! &&
      p >= linePower[k + 1]! &&
      p > linePower[k - 2]! &&
      p >= linePower[k + 2]!
    ))
      continue;
    let s = 0;
    let sf = 0;
    for (let j = k - 2; j <= k + 2; j++) {
      s += linePower[j]!;
      sf += linePower[j]! * j * df;
    }
    const rms = Math.sqrt(s);
    if (rms < minRms) continue;
    const f = sf / s;
    if (runFreqHz && runFreqHz > 0) {
      const h = Math.max(1, Math.round(f / runFreqHz));
      if (Math.abs(f - h * runFreqHz) <= tolHz(h)) continue;
    }
    found.push({ freqHz: f, rms });
  }
  found.sort((a, b) => b.rms - a.rms);
  return found.slice(0, maxPeaks);
}
