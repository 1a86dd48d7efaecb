import type { RevolutionTap } from './analyzer.js';
import { SyncAverager, velocityOrderComponent } from './sync-average.js';
import { rpmFromPeriod } from './tach.js';

/**
 * The 1x vector against speed, a point every few revolutions: what a run-up or coast-down is read
 * from (Bode and polar plots, resonances).
 *
 * Each point is the synchronous average of `revolutionsPerPoint` consecutive trusted revolutions
 * (angle domain, tach-referenced, the very bins the window's averagers cut, and their phase
 * convention), so a point is as short as the speed change allows and still rejects what is not
 * synchronous. Points are kept in typed arrays that grow by doubling (a few hundred bytes every few
 * revolutions, never per sample); `maxPoints` bounds them for the agent, the oldest dropped first.
 */

export interface SpeedPointOptions {
  readonly channels: number;
  readonly sampleRate: number;
  /** Resampling points per revolution (dsp.resample_points). */
  readonly resamplePoints: number;
  readonly revolutionsPerPoint: number;
  /** Largest number of points held; older ones are dropped first. Default: no bound. */
  readonly maxPoints?: number;
}

/** One point of a speed trace, for callers that want objects (reports, JSON). */
export interface SpeedPoint {
  /** Sample-clock index of the end of the point's last revolution. */
  readonly end_index: number;
  readonly rpm: number;
  /** Per channel, config order: 1x zero-to-peak velocity, mm/s, and phase lag, degrees 0-360. */
  readonly amp_pk_mm_s: readonly number[];
  readonly phase_deg: readonly number[];
  /**
   * True when the revolutions before this point were not contiguous with it (a gap in the samples).
   */
  readonly after_gap: boolean;
}

export class SpeedPointRecorder implements RevolutionTap {
  private readonly avgs: SyncAverager[];
  private revs = 0;
  private periodSum = 0;
  private gapPending = false;
  private head = 0;
  private count = 0;
  private cap: number;
  private endIdx: Float64Array;
  private rpmArr: Float64Array;
  private amp: Float64Array;
  private phase: Float64Array;
  private afterGap: Uint8Array;
  /** Points dropped because `maxPoints` was reached. */
  dropped = 0;

  constructor(private readonly opts: SpeedPointOptions) {
    if (opts.revolutionsPerPoint < 1) throw new Error('revolutionsPerPoint must be at least 1');
    this.avgs = Array.from({ length: opts.channels }, () => new SyncAverager(opts.resamplePoints));
    this.cap = Math.min(opts.maxPoints ?? 1024, 1024);
    this.endIdx = new Float64Array(this.cap);
    this.rpmArr = new Float64Array(this.cap);
    this.amp = new Float64Array(this.cap * opts.channels);
    this.phase = new Float64Array(this.cap * opts.channels);
    this.afterGap = new Uint8Array(this.cap);
  }

  revolution(bins: readonly Float64Array[], start: number, end: number): void {
    for (let c = 0; c < this.avgs.length; c++) this.avgs[c]!.addBins(bins[c]!);
    this.revs++;
    this.periodSum += end - start;
    if (this.revs >= this.opts.revolutionsPerPoint) this.closePoint(end);
  }

  gap(): void {
    this.resetAverage();
    this.gapPending = true;
  }

  /** Points held now. */
  get length(): number {
    return this.count;
  }

  /** Point i (0 = oldest held). */
  point(i: number): SpeedPoint {
    if (i < 0 || i >= this.count) throw new RangeError(`point ${i} of ${this.count}`);
    const k = (this.head + i) % this.cap;
    const n = this.opts.channels;
    return {
      end_index: this.endIdx[k]!,
      rpm: this.rpmArr[k]!,
      amp_pk_mm_s: Array.from(this.amp.subarray(k * n, k * n + n)),
      phase_deg: Array.from(this.phase.subarray(k * n, k * n + n)),
      after_gap: this.afterGap[k] === 1,
    };
  }

  points(): SpeedPoint[] {
    return Array.from({ length: this.count }, (_, i) => this.point(i));
  }

  /** Forgets the `k` oldest points (those of a sweep already taken). */
  dropOldest(k: number): void {
    const m = Math.max(0, Math.min(this.count, Math.floor(k)));
    this.head = (this.head + m) % this.cap;
    this.count -= m;
  }

  /** Speed of point i (0 = oldest held), r/min, without building the point object. */
  rpmAt(i: number): number {
    return this.rpmArr[(this.head + i) % this.cap]!;
  }

  /** Sample-clock end index of point i (0 = oldest held). */
  endIndexAt(i: number): number {
    return this.endIdx[(this.head + i) % this.cap]!;
  }

  /** The bound on held points (Infinity when none). */
  get maxPoints(): number {
    return this.opts.maxPoints ?? Infinity;
  }

  /** Forgets every point (after a sweep has been taken). */
  clear(): void {
    this.head = 0;
    this.count = 0;
  }

  private resetAverage(): void {
    for (const a of this.avgs) a.reset();
    this.revs = 0;
    this.periodSum = 0;
  }

  private closePoint(end: number): void {
    const period = this.periodSum / this.revs;
    const fRev = this.opts.sampleRate / period;
    const k = this.slot();
    const n = this.opts.channels;
    this.endIdx[k] = end;
    this.rpmArr[k] = rpmFromPeriod(period, this.opts.sampleRate);
    this.afterGap[k] = this.gapPending ? 1 : 0;
    for (let c = 0; c < n; c++) {
      const v = velocityOrderComponent(this.avgs[c]!.sum, this.revs, 1, fRev);
      this.amp[k * n + c] = v.amp;
      this.phase[k * n + c] = v.phaseDeg;
    }
    this.gapPending = false;
    this.resetAverage();
  }

  /**
   * The slot for a new point: grows the arrays by doubling up to maxPoints, then overwrites the
   * oldest.
   */
  private slot(): number {
    const max = this.opts.maxPoints ?? Infinity;
    if (this.count === this.cap && this.cap < max) this.grow(Math.min(this.cap * 2, max));
    if (this.count < this.cap) return (this.head + this.count++) % this.cap;
    const k = this.head;
    this.head = (this.head + 1) % this.cap;
    this.dropped++;
    return k;
  }

  private grow(cap: number): void {
    const n = this.opts.channels;
    const order = Array.from({ length: this.count }, (_, i) => (this.head + i) % this.cap);
    const remap = <T extends Float64Array | Uint8Array>(
      old: T,
      make: (len: number) => T,
      width: number,
    ): T => {
      const next = make(cap * width);
      order.forEach((k, i) => next.set(old.subarray(k * width, k * width + width), i * width));
      return next;
    };
    this.endIdx = remap(this.endIdx, (l) => new Float64Array(l), 1);
    this.rpmArr = remap(this.rpmArr, (l) => new Float64Array(l), 1);
    this.amp = remap(this.amp, (l) => new Float64Array(l), n);
    this.phase = remap(this.phase, (l) => new Float64Array(l), n);
    this.afterGap = remap(this.afterGap, (l) => new Uint8Array(l), 1);
    this.head = 0;
    this.cap = cap;
  }
}
