/**
 * Stage 1: volts -> acceleration in mm/s^2 with DC removed, plus raw-signal statistics.
 *
 * The DC estimate is an exponential average of means over fixed spans of samples (1 s, time
 * constant `dcTimeConstantS`) and is held constant between span ends, so removing it adds no phase
 * shift at any frequency, unlike a high-pass filter would, and does not depend on the block size.
 *
 * Two outputs: `out` (DC estimate removed, for the spectrum) and `syncOut` (a constant reference
 * level removed, for synchronous averaging). Order k >= 1 of a revolution does not see a constant
 * offset, but it does see every change of the offset inside a revolution: while the DC estimate
 * settles (the first span, where it is the mean of whatever has arrived, which follows the 1x
 * itself) each change is a step in the resampled revolution and biased the first live vectors by
 * about -2 % and -1.3 degrees at 0.5 s, still -0.4 % at 2 s. The reference level for `syncOut` is
 * set from the first block and only moved by `rebase()` (the analyzer calls it at a gap, where no
 * revolution spans the change); it is there only to keep float32 precision.
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
  private readonly spanSamples: number;
  private spanSum = 0;
  private spanN = 0;
  private readonly alpha: number;
  private ref = 0;
  private haveRef = false;

  /**
   * @param sensitivityMvPerG accelerometer sensitivity
   * @param sampleRate samples per second
   * @param dcTimeConstantS time constant of the DC estimate
   * @param dcSpanS the DC estimate changes only once per this many seconds of samples, whatever the
   *   block size: a mean over a block shorter than a revolution would follow the 1x signal itself
   */
  constructor(sensitivityMvPerG: number, sampleRate: number, dcTimeConstantS = 4, dcSpanS = 1) {
    this.scale = mmPerS2PerVolt(sensitivityMvPerG);
    this.spanSamples = Math.max(1, Math.round(sampleRate * dcSpanS));
    this.alpha = Math.min(1, dcSpanS / dcTimeConstantS);
  }

  /** Current DC estimate, volts. */
  get dcV(): number {
    return this.dc;
  }

  /** Reference level removed from `syncOut`, volts (constant between gaps). */
  get syncRefV(): number {
    return this.ref;
  }

  /**
   * Takes a new reference level for `syncOut` from the next block (after a gap: no revolution spans
   * it).
   */
  rebase(): void {
    this.haveRef = false;
  }

  /**
   * Converts one block of volts to mm/s^2 into `out` (DC estimate removed) and, when given,
   * `syncOut` (constant reference removed); both the same length as `volts` or longer.
   */
  process(volts: Float32Array, out: Float32Array, syncOut?: Float32Array): void {
    const n = volts.length;
    if (n === 0) return;
    let s = 0;
    for (let i = 0; i < n; i++) s += volts[i]!;
    if (!this.haveRef) {
      this.ref = s / n;
      this.haveRef = true;
    }
    this.spanSum += s;
    this.spanN += n;
    if (!this.primed) {
      // Until the first whole span: the mean of everything so far.
      this.dc = this.spanSum / this.spanN;
      if (this.spanN >= this.spanSamples) {
        this.primed = true;
        this.spanSum = 0;
        this.spanN = 0;
      }
    } else if (this.spanN >= this.spanSamples) {
      this.dc += this.alpha * (this.spanSum / this.spanN - this.dc);
      this.spanSum = 0;
      this.spanN = 0;
    }
    const dc = this.dc;
    const k = this.scale;
    if (syncOut) {
      const ref = this.ref;
      for (let i = 0; i < n; i++) {
        const v = volts[i]!;
        out[i] = (v - dc) * k;
        syncOut[i] = (v - ref) * k;
      }
    } else for (let i = 0; i < n; i++) out[i] = (volts[i]! - dc) * k;
  }
}
