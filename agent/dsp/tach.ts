/**
 * Stage 0: the once-per-turn reference.
 *
 * `TachDetector` finds rising edges on the tach channel: threshold with hysteresis, edge time to a
 * fraction of a sample by linear interpolation between the two samples that straddle the trigger
 * level. It passes every edge on; judging the spacing is the tracker's job.
 *
 * `RevolutionTracker` turns pulse times (from the detector or timed by the acquisition board) into
 * whole revolutions, grouping `pulses_per_rev` pulses, and refuses to average anything it cannot
 * trust: an interval that hides a missing pulse, a double trigger (an edge sooner than max_rpm
 * allows, or much sooner than the last interval), pulses that keep coming faster than max_rpm
 * allows (never "every other pulse"), or the first interval after a
 * start or a gap (the reference interval must be confirmed by two consistent intervals first).
 * With pulses_per_rev > 1 the pulses must be equally spaced, and which pulse starts a revolution is
 * the first one seen after a start or a gap: phase is then consistent within one run only.
 */

export interface TachDetectorOptions {
  readonly triggerV: number;
  readonly hysteresisV: number;
  /** Largest block the detector will be given; sets the edge buffer size. */
  readonly maxBlock: number;
}

export class TachDetector {
  /** Edge times of the last processed block, fractional absolute sample indices. */
  readonly edges: Float64Array;
  private prev = 0;
  private havePrev = false;
  private armed = false;
  min = Infinity;
  max = -Infinity;

  constructor(private readonly opts: TachDetectorOptions) {
    // An edge needs at least one sample above the trigger and one below the re-arm level.
    this.edges = new Float64Array(Math.ceil(opts.maxBlock / 2) + 2);
  }

  /**
   * Processes one block starting at absolute sample `startIndex`; returns the number of edges
   * written to `edges`.
   */
  process(x: Float32Array, startIndex: number): number {
    const trig = this.opts.triggerV;
    const rearm = trig - this.opts.hysteresisV;
    const edges = this.edges;
    let count = 0;
    let prev = this.prev;
    let havePrev = this.havePrev;
    let armed = this.armed;
    let mn = this.min;
    let mx = this.max;
    for (let i = 0; i < x.length; i++) {
      const v = x[i]!;
      if (v < mn) mn = v;
      if (v > mx) mx = v;
      if (armed) {
        if (havePrev && prev < trig && v >= trig) {
          const t = startIndex + i - 1 + (trig - prev) / (v - prev);
          armed = false;
          edges[count++] = t;
        }
      } else if (v < rearm) {
        armed = true;
      }
      prev = v;
      havePrev = true;
    }
    this.prev = prev;
    this.havePrev = havePrev;
    this.armed = armed;
    this.min = mn;
    this.max = mx;
    return count;
  }

  /** Forget the signal history (after a gap): the next edge needs a fresh low level first. */
  reset(): void {
    this.havePrev = false;
    this.armed = false;
  }

  resetWindowStats(): void {
    this.min = Infinity;
    this.max = -Infinity;
  }
}

export interface RevolutionTrackerOptions {
  readonly pulsesPerRev: number;
  readonly sampleRate: number;
  readonly minRpm: number;
  readonly maxRpm: number;
}

/** Called with a trusted revolution [start, end] in fractional absolute sample indices. */
export type RevolutionSink = (start: number, end: number) => void;

/**
 * Interval ratio limits against the reference interval (common practice: speed changes little in
 * one pulse).
 */
const SHORT_RATIO = 0.6;
const LONG_RATIO = 1.4;
/** Largest change of revolution length from one revolution to the next that is still averaged. */
const MAX_REV_CHANGE = 0.1;

export class RevolutionTracker {
  private last: number | undefined;
  private ref: number | undefined;
  private confirmed = false;
  private lastIgnored: number | undefined;
  private revStart: number | undefined;
  private pulsesInRev = 0;
  private lastRevLength: number | undefined;
  private readonly minPulse: number;
  private readonly maxPulse: number;
  /** Window counters. */
  edgesAccepted = 0;
  missingPulses = 0;
  doubleTriggers = 0;
  /** Pulses that came regularly faster than max_rpm allows. */
  tooFastPulses = 0;
  /** Revolutions not averaged because their length changed too much from the previous one. */
  unevenRevolutions = 0;
  revolutionsRejected = 0;

  constructor(
    private readonly opts: RevolutionTrackerOptions,
    private readonly sink: RevolutionSink,
  ) {
    const perPulse = (rpm: number) => (60 * opts.sampleRate) / (rpm * opts.pulsesPerRev);
    this.minPulse = perPulse(opts.maxRpm);
    this.maxPulse = perPulse(opts.minRpm);
  }

  private restartRevAt(t: number): void {
    if (this.confirmed && this.revStart !== undefined) this.revolutionsRejected++;
    this.revStart = t;
    this.pulsesInRev = 0;
    this.lastRevLength = undefined;
  }

  edge(t: number): void {
    const last = this.last;
    if (last === undefined) {
      this.last = t;
      this.revStart = t;
      this.pulsesInRev = 0;
      return;
    }
    const d = t - last;
    const li = this.lastIgnored;
    if (li !== undefined && t - li < this.minPulse) {
      // Pulses keep coming faster than tach.max_rpm allows: not a stray double trigger but a speed
      // (or a pulses_per_rev setting) the tracker must not average. Nothing is trusted until it
      // stops.
      this.tooFastPulses++;
      this.last = t;
      this.lastIgnored = undefined;
      this.ref = undefined;
      this.restartRevAt(t);
      this.confirmed = false;
      return;
    }
    if (d < this.minPulse) {
      this.doubleTriggers++;
      this.lastIgnored = t;
      return;
    }
    if (d > this.maxPulse) {
      // Slower than the slowest plausible speed: pulses were lost or the machine stopped.
      if (this.ref !== undefined) this.missingPulses += Math.max(1, Math.round(d / this.ref) - 1);
      else this.missingPulses++;
      this.restartRevAt(t);
      this.ref = undefined;
      this.confirmed = false;
      this.last = t;
      this.lastIgnored = undefined;
      return;
    }
    const ref = this.ref;
    if (ref === undefined) {
      this.ref = d;
      this.confirmed = false;
      this.last = t;
      this.restartRevAt(t);
      return;
    }
    const r = d / ref;
    if (r < SHORT_RATIO && !this.confirmed) {
      // An unconfirmed reference may itself hide a missing pulse: learn again from here.
      this.ref = d;
      this.last = t;
      this.restartRevAt(t);
      return;
    }
    if (r < SHORT_RATIO) {
      const li = this.lastIgnored;
      if (li !== undefined && (t - li) / ref < SHORT_RATIO) {
        // Pulses keep coming faster than the reference: the reference itself was wrong.
        this.ref = t - li;
        this.confirmed = false;
        this.last = t;
        this.lastIgnored = undefined;
        this.restartRevAt(t);
        return;
      }
      this.doubleTriggers++;
      this.lastIgnored = t;
      return;
    }
    this.lastIgnored = undefined;
    if (r > LONG_RATIO) {
      if (this.confirmed) this.missingPulses += Math.max(1, Math.round(r) - 1);
      else this.ref = d; // an unconfirmed reference may have been the odd one
      this.last = t;
      this.restartRevAt(t);
      return;
    }
    // A consistent interval.
    this.ref = d;
    this.last = t;
    if (!this.confirmed) {
      this.confirmed = true;
      this.revStart = last;
      this.pulsesInRev = 0;
    }
    this.edgesAccepted++;
    this.pulsesInRev++;
    if (this.pulsesInRev === this.opts.pulsesPerRev) {
      const start = this.revStart!;
      this.revStart = t;
      this.pulsesInRev = 0;
      const len = t - start;
      const prev = this.lastRevLength;
      this.lastRevLength = len;
      // Averaging assumes the shaft turns evenly within a revolution: a revolution much longer or
      // shorter than the previous one (a spliced record, a slipping belt) is counted but not
      // averaged.
      if (prev !== undefined && Math.abs(len / prev - 1) > MAX_REV_CHANGE) {
        this.revolutionsRejected++;
        this.unevenRevolutions++;
        return;
      }
      this.sink(start, t);
    }
  }

  /** After a gap in the samples: the open revolution is dropped and the reference re-learned. */
  reset(): void {
    if (this.revStart !== undefined && this.confirmed) this.revolutionsRejected++;
    this.last = undefined;
    this.ref = undefined;
    this.confirmed = false;
    this.lastIgnored = undefined;
    this.revStart = undefined;
    this.pulsesInRev = 0;
    this.lastRevLength = undefined;
  }

  resetWindowStats(): void {
    this.edgesAccepted = 0;
    this.missingPulses = 0;
    this.doubleTriggers = 0;
    this.tooFastPulses = 0;
    this.unevenRevolutions = 0;
    this.revolutionsRejected = 0;
  }
}

/** Speed in r/min from a revolution length in samples. */
export function rpmFromPeriod(periodSamples: number, sampleRate: number): number {
  return (60 * sampleRate) / periodSamples;
}
