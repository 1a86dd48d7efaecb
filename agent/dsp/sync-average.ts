/**
 * Stage 2: synchronous averaging in the angle domain.
 *
 * Samples are kept in a ring buffer. When the tach closes a revolution [start, end] (fractional
 * sample indices), the revolution is cut into `points` equal bins of shaft angle, bin m centred on
 * angle 2 pi m / points (0 at the tach edge), and each bin's value is the mean of the signal over
 * it (the exact integral of the linear interpolation between samples, divided by the bin's width).
 * The bins' values are added to a running sum. Averaging N revolutions keeps what is synchronous
 * with the shaft and cancels the rest, and tolerates slow speed drift because every revolution is
 * stretched to the same angle grid.
 *
 * Bin means rather than point values: every sample counts (at 300 r/min and 10 kHz a revolution
 * holds 2000 samples for 256 bins; reading 256 interpolated points would use one in eight), so the
 * noise left on an order after averaging falls with the square root of the samples per bin, and a
 * bin is its own anti-alias filter for the angle grid. The price is a known gain at order k,
 * sinc(k / points) = sin(pi k / points) / (pi k / points) (the response of a centred moving average
 * one bin wide; textbook), which `orderComponent` divides out: 0.99997 at 1x with 256 bins. The
 * linear interpolation's own response, sinc^2(f / fs), stays (1 - 3e-6 for 1x of a fan at
 * 25.6 kHz). A bin reaches half a bin before `start` and after `end`: `reach` gives the samples
 * needed.
 */

export interface OrderComponent {
  /** Zero-to-peak amplitude in the input's units. */
  amp: number;
  /** Lag in degrees 0-360 of the order's own cycle from the tach edge to the positive peak. */
  phaseDeg: number;
}

export class SampleRing {
  readonly data: Float32Array;
  readonly mask: number;
  /** Absolute index one past the last sample written. */
  end = 0;

  constructor(minCapacity: number) {
    let cap = 1;
    while (cap < minCapacity) cap *= 2;
    this.data = new Float32Array(cap);
    this.mask = cap - 1;
  }

  /**
   * Appends a block whose first sample has absolute index `startIndex` (must equal `end` unless
   * after reset).
   */
  write(block: Float32Array, startIndex: number, length = block.length): void {
    const cap = this.data.length;
    let w = startIndex & this.mask;
    let i = 0;
    while (i < length) {
      const run = Math.min(length - i, cap - w);
      this.data.set(block.subarray(i, i + run), w);
      i += run;
      w = 0;
    }
    this.end = startIndex + length;
  }

  /** True when samples [from, to] are still held. */
  holds(from: number, to: number): boolean {
    return from >= this.end - this.data.length && to < this.end && from >= 0;
  }
}

export class SyncAverager {
  readonly sum: Float64Array;
  revolutions = 0;
  /**
   * Exponentially weighted average for the live view: each revolution is added with weight 1 and
   * older ones fade by `liveDecay` per revolution, so the live vectors follow a balancing run
   * within a few seconds while the window sum keeps every revolution equally.
   */
  readonly live: Float64Array;
  liveWeight = 0;
  /** The bins of the last revolution added (what a second average of the same revolutions adds). */
  readonly last: Float64Array;
  private readonly liveDecay: number;

  constructor(
    readonly points: number,
    liveRevolutions = 32,
  ) {
    this.sum = new Float64Array(points);
    this.live = new Float64Array(points);
    this.last = new Float64Array(points);
    this.liveDecay = 1 - 1 / Math.max(1, liveRevolutions);
  }

  /**
   * First and last sample index the bins of revolution [start, end] read (half a bin beyond each
   * end).
   */
  reach(start: number, end: number): { from: number; to: number } {
    const half = (end - start) / (2 * this.points);
    return { from: Math.floor(start - half), to: Math.floor(end + half) + 1 };
  }

  /**
   * Adds revolution [start, end] of `ring` to the sum as bin means. The caller checks
   * `ring.holds(reach)`.
   */
  addRevolution(ring: SampleRing, start: number, end: number): void {
    const M = this.points;
    const step = (end - start) / M;
    const inv = 1 / step;
    const d = ring.data;
    const mask = ring.mask;
    const sum = this.sum;
    const live = this.live;
    const last = this.last;
    const decay = this.liveDecay;
    // Bin m spans [p, q] = start + (m -+ 0.5) step. The integral of the linear interpolation over
    // it is a trapezoid from p to the first sample after it, the trapezoids between the samples
    // inside (each sample's value once, the two end ones half), and a trapezoid from the last
    // sample to q; inside a single sample interval it is one trapezoid. One add per sample.
    let p = start - 0.5 * step;
    let ip = Math.floor(p);
    let a = d[ip & mask]!;
    let xp = a + (p - ip) * (d[(ip + 1) & mask]! - a);
    for (let m = 0; m < M; m++) {
      const q = start + (m + 0.5) * step;
      const iq = Math.floor(q);
      a = d[iq & mask]!;
      const xq = a + (q - iq) * (d[(iq + 1) & mask]! - a);
      let acc: number;
      if (iq === ip) acc = 0.5 * (q - p) * (xp + xq);
      else {
        const xc = d[(ip + 1) & mask]!;
        let inside = 0;
        for (let k = ip + 1; k <= iq; k++) inside += d[k & mask]!;
        acc = 0.5 * (ip + 1 - p) * (xp + xc) + inside - 0.5 * (xc + a) + 0.5 * (q - iq) * (a + xq);
      }
      p = q;
      ip = iq;
      xp = xq;
      const x = acc * inv;
      sum[m] = sum[m]! + x;
      live[m] = live[m]! * decay + x;
      last[m] = x;
    }
    this.liveWeight = this.liveWeight * decay + 1;
    this.revolutions++;
  }

  /** Adds a revolution already cut into bins (another averager's `last`) to the sum. */
  addBins(bins: Float64Array): void {
    const sum = this.sum;
    for (let m = 0; m < this.points; m++) sum[m] = sum[m]! + bins[m]!;
    this.revolutions++;
  }

  reset(): void {
    this.sum.fill(0);
    this.revolutions = 0;
  }
}

/**
 * Order k of an averaged revolution (sum of `revolutions` revolutions of bin means, from
 * SyncAverager.addRevolution):
 * x(theta) = amp * cos(k*theta - phase), phase returned as a lag in 0-360 degrees.
 */
export function orderComponent(
  sum: Float64Array,
  revolutions: number,
  order: number,
): OrderComponent {
  const M = sum.length;
  let re = 0;
  let im = 0;
  const w = (2 * Math.PI * order) / M;
  for (let m = 0; m < M; m++) {
    const v = sum[m]!;
    re += v * Math.cos(w * m);
    im -= v * Math.sin(w * m);
  }
  // The bin mean's gain at this order (see the top of this file), divided out.
  const x = (Math.PI * order) / M;
  const binGain = x === 0 ? 1 : Math.sin(x) / x;
  const scale = 2 / (M * revolutions * binGain);
  const amp = Math.hypot(re, im) * scale;
  // Y = (M/2) A e^{-j phase}  ->  phase = -arg(Y)
  return { amp, phaseDeg: wrapDeg((-Math.atan2(im, re) * 180) / Math.PI) };
}

/**
 * Order k of an averaged revolution of acceleration, as velocity: amplitude divided by the order's
 * angular frequency, and a lag 90 degrees larger (velocity lags acceleration by a quarter of the
 * order's cycle; textbook relation).
 */
export function velocityOrderComponent(
  sum: Float64Array,
  revolutions: number,
  order: number,
  fRevHz: number,
): OrderComponent {
  const a = orderComponent(sum, revolutions, order);
  return { amp: a.amp / (2 * Math.PI * order * fRevHz), phaseDeg: wrapDeg(a.phaseDeg + 90) };
}

/** Wraps an angle to [0, 360). */
export function wrapDeg(deg: number): number {
  const r = deg % 360;
  return r < 0 ? r + 360 : r === 360 ? 0 : r;
}
