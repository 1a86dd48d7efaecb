/**
 * Stage 1: volts -> acceleration in mm/s^2 with DC removed, plus raw-signal statistics.
 *
 * The DC estimate is updated once per block (exponential average of block means, time constant
 * `dcTimeConstantS`) and held constant within a block, so removing it adds no phase shift at any
 * frequency, unlike a high-pass filter would.
 */

/** Standard gravity, m/s^2 (3rd CGPM, 1901; ISO 80000-3). */
export const STANDARD_GRAVITY_M_S2 = 9.80665;

/** mm/s^2 per volt for an accelerometer of the given sensitivity in mV/g. */
export function mmPerS2PerVolt(sensitivityMvPerG: number): number {
  return (STANDARD_GRAVITY_M_S2 * 1000) / (sensitivityMvPerG / 1000);
}

/** Running statistics of raw volts, accumulated about a fixed shift to keep precision. */
export class RawStats {
  private shift = 0;
  private sum = 0;
  private sumSq = 0;
  private n = 0;
  min = Infinity;
  max = -Infinity;
  clipped = 0;

  constructor(private readonly clipLevelV: number) {}

  /** Adds one block; one pass, no allocation. */
  add(x: Float32Array): void {
    if (x.length === 0) return;
    if (this.n === 0) this.shift = x[0]!;
    const shift = this.shift;
    const clip = this.clipLevelV;
    let s = 0;
    let s2 = 0;
    let mn = this.min;
    let mx = this.max;
    let clipped = 0;
    for (let i = 0; i < x.length; i++) {
      const v = x[i]!;
      const d = v - shift;
      s += d;
      s2 += d * d;
      if (v < mn) mn = v;
      if (v > mx) mx = v;
      if (v >= clip || v <= -clip) clipped++;
    }
    this.sum += s;
    this.sumSq += s2;
    this.n += x.length;
    this.min = mn;
    this.max = mx;
    this.clipped += clipped;
  }

  get samples(): number {
    return this.n;
  }
  get mean(): number {
    return this.n ? this.shift + this.sum / this.n : 0;
  }
  get acRms(): number {
    if (!this.n) return 0;
    const m = this.sum / this.n;
    return Math.sqrt(Math.max(0, this.sumSq / this.n - m * m));
  }

  reset(): void {
    this.sum = 0;
    this.sumSq = 0;
    this.n = 0;
    this.min = Infinity;
    this.max = -Infinity;
    this.clipped = 0;
  }
}

export class AccelerationStage {
  private dc = 0;
  private primed = false;
  private readonly scale: number;

  /**
   * @param sensitivityMvPerG accelerometer sensitivity
   * @param sampleRate samples per second
   * @param dcTimeConstantS time constant of the DC estimate
   */
  constructor(
    sensitivityMvPerG: number,
    private readonly sampleRate: number,
    private readonly dcTimeConstantS = 1,
  ) {
    this.scale = mmPerS2PerVolt(sensitivityMvPerG);
  }

  /** Current DC estimate, volts. */
  get dcV(): number {
    return this.dc;
  }

  /** Converts one block of volts to mm/s^2 into `out` (same length or longer). */
  process(volts: Float32Array, out: Float32Array): void {
    const n = volts.length;
    if (n === 0) return;
    let s = 0;
    for (let i = 0; i < n; i++) s += volts[i]!;
    const blockMean = s / n;
    if (!this.primed) {
      this.dc = blockMean;
      this.primed = true;
    } else {
      const alpha = Math.min(1, n / (this.sampleRate * this.dcTimeConstantS));
      this.dc += alpha * (blockMean - this.dc);
    }
    const dc = this.dc;
    const k = this.scale;
    for (let i = 0; i < n; i++) out[i] = (volts[i]! - dc) * k;
  }
}
