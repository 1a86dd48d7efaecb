/**
 * Finding run-ups and coast-downs in a speed trace (pure).
 *
 * The trace is walked once with a running extreme: a sweep goes on while the speed keeps moving the
 * same way, reversals smaller than `reversalRpm` are ignored (tach jitter, a control loop hunting),
 * a larger reversal ends it at its extreme. The ends are then trimmed to the last point still at
 * the starting speed and the first point already at the final speed (within `steadyRpm`), so a
 * steady run before or after a sweep is not part of it. A sweep is kept when the speed moved
 * through at least `minChangeRpm`.
 */

export interface SweepSpan {
  readonly direction: 'up' | 'down';
  /** Indices into the trace, inclusive. */
  readonly start: number;
  readonly end: number;
}

export interface FindSweepOptions {
  /** Smallest speed change that makes a sweep, r/min. */
  readonly minChangeRpm: number;
  /** A move against the sweep's direction larger than this ends it, r/min. */
  readonly reversalRpm: number;
  /** Points within this of the start (end) speed are trimmed off as steady running, r/min. */
  readonly steadyRpm: number;
}

export function findSweeps(rpm: ArrayLike<number>, opts: FindSweepOptions): SweepSpan[] {
  const n = rpm.length;
  const out: SweepSpan[] = [];
  if (n < 3) return out;
  let anchor = 0;
  let dir = 0;
  let ext = 0;
  const close = (endIdx: number) => {
    if (dir === 0) return;
    const s = trimStart(rpm, anchor, endIdx, opts.steadyRpm);
    const e = trimEnd(rpm, s, endIdx, opts.steadyRpm);
    if (e > s && Math.abs(rpm[e]! - rpm[s]!) >= opts.minChangeRpm)
      out.push({ direction: dir > 0 ? 'up' : 'down', start: s, end: e });
  };
  for (let i = 1; i < n; i++) {
    const v = rpm[i]!;
    if (dir === 0) {
      if (Math.abs(v - rpm[anchor]!) > opts.reversalRpm) {
        dir = v > rpm[anchor]! ? 1 : -1;
        ext = i;
      }
      continue;
    }
    if (dir * (v - rpm[ext]!) > 0) {
      ext = i;
    } else if (dir * (rpm[ext]! - v) > opts.reversalRpm) {
      close(ext);
      anchor = ext;
      dir = -dir;
      ext = i;
    }
  }
  close(ext);
  return out;
}

/** The last index from `from` on whose speed is still within `tol` of the speed at `from`. */
function trimStart(rpm: ArrayLike<number>, from: number, to: number, tol: number): number {
  const ref = rpm[from]!;
  let s = from;
  while (s + 1 < to && Math.abs(rpm[s + 1]! - ref) <= tol) s++;
  return s;
}

/** The first index back from `to` whose speed is within `tol` of the speed at `to`. */
function trimEnd(rpm: ArrayLike<number>, from: number, to: number, tol: number): number {
  const ref = rpm[to]!;
  let e = to;
  while (e - 1 > from && Math.abs(rpm[e - 1]! - ref) <= tol) e--;
  return e;
}
