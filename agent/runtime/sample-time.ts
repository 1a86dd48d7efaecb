/**
 * Wall-clock time of samples: the sample clock anchored to the wall clock.
 *
 * A sample's time is `anchorMs + (index - anchorIndex) / fs` (times the simulation's time scale).
 * Where the anchor comes from depends on the source:
 *
 * - Recordings and the simulator (blocks without `arrivedMs`): the anchor is the source's start
 *   time (`startMs`, default the clock when the source opened) at the index of the first block.
 * - Live boards (blocks carry `arrivedMs`, the wall-clock time their last sample was received):
 *   the anchor is the arrival of the first block after every start of the agent and after every
 *   restart of the board's sample clock (a gap marked `clockRestart`). The board's own index
 *   (which counts from the board's start, maybe hours before the agent's) never sets the time.
 *
 * For live boards every block is also compared with the anchor: `arrivedMs - timeOf(end)` is the
 * block's latency (USB and buffering, a few ms; never negative except by the anchor's own latency).
 * - Slow drift (the board's crystal against NTP time, tens of ppm) is slewed out: every
 *   `slewSpanS` seconds of samples the anchor moves by the least latency seen in that span, at
 *   most `maxSlewMs`, so times stay within tens of ms of the wall clock without steps.
 * - A wall clock that jumps backwards (latency below -stepToleranceMs) re-anchors at once.
 * - A wall clock that jumps forwards (every block of one second of samples later than
 *   +stepToleranceMs) re-anchors to the least latency of that second. A stalled process that
 *   delivers late only for a moment does not: its blocks are late, then on time again.
 * Each re-anchoring is counted and reported once through `onStep` (the runtime logs it); sampling
 * and monitoring go on.
 */

export interface TimelineOptions {
  readonly sampleRate: number;
  /** Calendar seconds per second of samples (simulations); 1 for live sources. */
  readonly timeScale?: number;
  /** A latency beyond this (either sign) is a step of the wall clock, ms. */
  readonly stepToleranceMs?: number;
  /** Seconds of samples over which the least latency is taken for slewing. */
  readonly slewSpanS?: number;
  /** Largest correction per span, ms. */
  readonly maxSlewMs?: number;
  /** Called at each re-anchoring with its cause in words and the step, ms. */
  readonly onStep?: (kind: TimeStepKind, detail: string, stepMs: number) => void;
}

export type TimeStepKind = 'wall_clock_back' | 'wall_clock_forward' | 'board_restart';

/** Counters for the heartbeat; field names carry their units. */
export type TimelineHealth = {
  /**
   * Times the sample clock was anchored to the wall clock (1 at start, +1 per board restart or
   * wall-clock step).
   */
  readonly time_anchors: number;
  readonly wall_clock_steps_back: number;
  readonly wall_clock_steps_forward: number;
  /**
   * Latency of the last block: wall-clock arrival minus its stamped time, ms (live boards only).
   */
  readonly time_latency_ms: number | null;
  /** Total slew applied since the last anchoring, ms (positive: the board's clock runs slow). */
  readonly time_slew_ms: number;
};

export class SampleTimeline {
  private readonly fs: number;
  private readonly scale: number;
  private readonly tolMs: number;
  private readonly spanSamples: number;
  private readonly maxSlewMs: number;
  private anchorIndex = 0;
  private anchorMs = 0;
  private anchored = false;
  private reanchorPending = false;
  /** Least latency in the current slew span, and the span's end index. */
  private spanMin = Infinity;
  private spanEnd = 0;
  /**
   * Forward-step candidate: least latency since the first block later than the tolerance, and where
   * it began.
   */
  private lateSince: number | null = null;
  private lateMin = Infinity;
  private anchors = 0;
  private stepsBack = 0;
  private stepsForward = 0;
  private lastLatency: number | null = null;
  private slew = 0;

  constructor(private readonly opts: TimelineOptions) {
    this.fs = opts.sampleRate;
    this.scale = opts.timeScale ?? 1;
    this.tolMs = opts.stepToleranceMs ?? 1000;
    this.spanSamples = Math.max(1, Math.round((opts.slewSpanS ?? 10) * this.fs));
    this.maxSlewMs = opts.maxSlewMs ?? 20;
  }

  get isAnchored(): boolean {
    return this.anchored && !this.reanchorPending;
  }

  /** Sample `index` is at wall-clock `wallMs`. */
  anchor(index: number, wallMs: number): void {
    this.anchorIndex = index;
    this.anchorMs = wallMs;
    this.anchored = true;
    this.reanchorPending = false;
    this.anchors++;
    this.spanMin = Infinity;
    this.spanEnd = index + this.spanSamples;
    this.lateSince = null;
    this.lateMin = Infinity;
    this.slew = 0;
  }

  /** The sample clock restarted (a gap marked clockRestart): the next live block anchors again. */
  restart(): void {
    if (this.anchored) this.reanchorPending = true;
  }

  /** Wall-clock time of sample `index`, ms. */
  timeOf(index: number): number {
    return this.anchorMs + ((index - this.anchorIndex) / this.fs) * 1000 * this.scale;
  }

  /**
   * A live block whose last sample (`endIndex` is one past it) was received at `arrivedMs`:
   * anchors when due, slews, and detects steps of the wall clock.
   */
  observe(endIndex: number, arrivedMs: number): void {
    if (!this.anchored || this.reanchorPending) {
      const restart = this.anchored;
      this.anchor(endIndex, arrivedMs);
      if (restart)
        this.opts.onStep?.(
          'board_restart',
          "the board's sample clock restarted; times anchored " +
            'again to the wall clock at its first frame',
          0,
        );
      this.lastLatency = 0;
      return;
    }
    const lat = arrivedMs - this.timeOf(endIndex);
    this.lastLatency = lat;
    if (lat < -this.tolMs) {
      this.stepsBack++;
      this.anchor(endIndex, arrivedMs);
      this.opts.onStep?.(
        'wall_clock_back',
        `the wall clock is ${(-lat / 1000).toFixed(3)} s behind the board's sample clock ` +
          `(stepped back: NTP or a manual setting?); times anchored again, sampling goes on`,
        lat,
      );
      this.lastLatency = 0;
      return;
    }
    if (lat > this.tolMs) {
      if (this.lateSince === null) this.lateSince = endIndex;
      this.lateMin = Math.min(this.lateMin, lat);
      if (endIndex - this.lateSince >= this.fs) {
        const step = this.lateMin;
        this.stepsForward++;
        this.anchorMs += step;
        const at = this.anchorMs;
        const idx = this.anchorIndex;
        this.anchor(idx, at);
        this.opts.onStep?.(
          'wall_clock_forward',
          `the wall clock is ${(step / 1000).toFixed(3)} s ahead of the board's ` +
            `sample clock for a whole second of samples (stepped forward: NTP or ` +
            `a manual setting?); times anchored again, sampling goes on`,
          step,
        );
        this.lastLatency = lat - step;
      }
      return;
    }
    this.lateSince = null;
    this.lateMin = Infinity;
    if (lat < this.spanMin) this.spanMin = lat;
    if (endIndex >= this.spanEnd) {
      const c = Math.max(-this.maxSlewMs, Math.min(this.maxSlewMs, this.spanMin));
      this.anchorMs += c;
      this.slew += c;
      this.spanMin = Infinity;
      this.spanEnd = endIndex + this.spanSamples;
    }
  }

  health(): TimelineHealth {
    return {
      time_anchors: this.anchors,
      wall_clock_steps_back: this.stepsBack,
      wall_clock_steps_forward: this.stepsForward,
      time_latency_ms: this.lastLatency === null ? null : Math.round(this.lastLatency * 10) / 10,
      time_slew_ms: Math.round(this.slew * 10) / 10,
    };
  }
}
