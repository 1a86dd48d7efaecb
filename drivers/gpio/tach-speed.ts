/**
 * Running speed from a once-per-turn pulse wired to a GPIO input.
 *
 * For speed only, never for phase: a GPIO edge is time-stamped when user space gets round to
 * servicing the interrupt, with latency and jitter of the order of a millisecond or more on a busy
 * board. At 1480 r/min one turn lasts 40.5 ms, so 1 ms of jitter is about 9 degrees of phase,
 * while balancing needs a degree or two. For speed, only the jitter of the first and last edge of
 * the averaged span counts: 1 ms at each end over 4 turns (162 ms) is at most 1.2 % of speed,
 * over 16 turns 0.3 %; enough for display and plausibility checks. Phase, and the speed the DSP
 * uses, come from tach edges timed in the acquisition board's own sample clock (see
 * drivers/serial/PROTOCOL.md, section 4).
 */
import type { DigitalInput } from './types.js';

export interface PulseSpeedOptions {
  readonly pulsesPerRev: number;
  /** Slower pulses mean the shaft stopped or pulses were lost: the speed becomes unknown. */
  readonly minRpm: number;
  /** Faster pulses are double triggers (noise, a second mark) and are ignored. */
  readonly maxRpm: number;
  /** Revolutions averaged for the speed. Default 4. */
  readonly averageRevs?: number;
}

export interface PulseSpeedCounters {
  edges: number;
  double_triggers: number;
  /** Intervals longer than the slowest plausible speed (stopped shaft or lost pulses). */
  dropouts: number;
}

/** Pure: turns pulse times into a speed. Allocation-free after construction. */
export class PulseSpeed {
  readonly counters: PulseSpeedCounters = { edges: 0, double_triggers: 0, dropouts: 0 };
  private readonly intervals: Float64Array;
  private readonly minIntervalMs: number;
  private readonly maxIntervalMs: number;
  private readonly pulsesPerRev: number;
  private count = 0;
  private next = 0;
  private lastMs: number | null = null;

  constructor(opts: PulseSpeedOptions) {
    if (!(opts.minRpm > 0 && opts.maxRpm > opts.minRpm))
      throw new RangeError('need 0 < minRpm < maxRpm');
    this.pulsesPerRev = opts.pulsesPerRev;
    this.intervals = new Float64Array(
      Math.max(1, Math.round((opts.averageRevs ?? 4) * opts.pulsesPerRev)),
    );
    this.minIntervalMs = 60_000 / (opts.maxRpm * opts.pulsesPerRev);
    this.maxIntervalMs = 60_000 / (opts.minRpm * opts.pulsesPerRev);
  }

  /** A pulse's leading edge at `atMs`. */
  edge(atMs: number): void {
    this.counters.edges++;
    if (this.lastMs === null) {
      this.lastMs = atMs;
      return;
    }
    const dt = atMs - this.lastMs;
    if (dt < this.minIntervalMs) {
      this.counters.double_triggers++;
      return; // keep the earlier edge as the reference
    }
    this.lastMs = atMs;
    if (dt > this.maxIntervalMs) {
      this.counters.dropouts++;
      this.reset();
      return;
    }
    if (this.count < this.intervals.length) this.count++;
    this.intervals[this.next] = dt;
    this.next = (this.next + 1) % this.intervals.length;
  }

  /**
   * Speed in r/min averaged over the last intervals, or null when unknown (no pulses, stopped,
   * lost).
   */
  rpm(nowMs: number): number | null {
    if (this.count === 0 || this.lastMs === null || nowMs - this.lastMs > this.maxIntervalMs)
      return null;
    let sum = 0;
    for (let i = 0; i < this.count; i++) sum += this.intervals[i]!;
    return (60_000 * this.count) / (this.pulsesPerRev * sum);
  }

  private reset(): void {
    this.count = 0;
    this.next = 0;
  }
}

/** A PulseSpeed fed from a GPIO input's active edges. */
export class GpioTachSpeed {
  private readonly unwatch: () => void;

  constructor(
    private readonly input: DigitalInput,
    readonly speed: PulseSpeed,
  ) {
    this.unwatch = input.watch((value, atMs) => {
      if (value) speed.edge(atMs);
    });
  }

  rpm(nowMs: number): number | null {
    return this.speed.rpm(nowMs);
  }

  async close(): Promise<void> {
    this.unwatch();
    await this.input.close();
  }
}
