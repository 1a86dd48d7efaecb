/**
 * Stage 2: synchronous averaging in the angle domain.
 *
 * Samples are kept in a ring buffer. When the tach closes a revolution [start, end] (fractional
 * sample indices), the revolution is resampled by linear interpolation to `points` equally spaced
 * shaft angles, 0 at the tach edge, and added to a running sum. Averaging N revolutions keeps what
 * is synchronous with the shaft and cancels the rest, and tolerates slow speed drift because every
 * revolution is stretched to the same angle grid.
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

  /** Appends a block whose first sample has absolute index `startIndex` (must equal `end` unless after reset). */
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
   * older ones fade by `liveDecay` per revolution, so the live vectors follow a balancing run within
   * a few seconds while the window sum keeps every revolution equally.
   */
  readonly live: Float64Array;
  liveWeight = 0;
  private readonly liveDecay: number;

  constructor(
    readonly points: number,
    liveRevolutions = 32,
  ) {
    this.sum = new Float64Array(points);
    this.live = new Float64Array(points);
    this.liveDecay = 1 - 1 / Math.max(1, liveRevolutions);
  }

  /** Resamples revolution [start, end] from `ring` and adds it to the sum. The caller checks `ring.holds`. */
  addRevolution(ring: SampleRing, start: number, end: number): void {
    const M = this.points;
    const step = (end - start) / M;
    const d = ring.data;
    const mask = ring.mask;
    const sum = this.sum;
    const live = this.live;
    const decay = this.liveDecay;
    for (let m = 0; m < M; m++) {
      const pos = start + m * step;
      const i0 = Math.floor(pos);
      const f = pos - i0;
      const a = d[i0 & mask]!;
      const x = a + f * (d[(i0 + 1) & mask]! - a);
      sum[m] = sum[m]! + x;
      live[m] = live[m]! * decay + x;
    }
    this.liveWeight = this.liveWeight * decay + 1;
    this.revolutions++;
  }

  reset(): void {
    this.sum.fill(0);
    this.revolutions = 0;
  }
}

/**
 * Order k of an averaged revolution (sum of `revolutions` resampled revolutions):
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
  const scale = 2 / (M * revolutions);
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
