import type { Config } from '../config/schema.js';
import { UserError } from '../errors.js';
import type { SourceItem } from '../../drivers/source.js';
import { AccelerationStage, RawStats } from './acceleration.js';
import { SignalFactsStage } from './signal-facts.js';
import { Decimator, DecimatorPlan } from './decimate.js';
import {
  bandRms,
  nonSynchronousPeaks,
  SpectrumAccumulator,
  SpectrumPlan,
  velocityLinePower,
} from './spectrum.js';
import { SampleRing, SyncAverager, velocityOrderComponent } from './sync-average.js';
import { RevolutionTracker, rpmFromPeriod, TachDetector } from './tach.js';
import type { ChannelResult, LiveFrame, OrderVector, WindowResult } from './types.js';

/**
 * The measurement core: source items in, one WindowResult per window out.
 *
 *   volts --AccelerationStage--> mm/s^2 (constant reference removed) --> SampleRing --(tach
 *   revolutions)--> SyncAverager --> order vectors
 *                                     (DC estimate removed) --> Decimator --> SpectrumAccumulator --> overall r.m.s., non-synchronous peaks
 *   tach volts --TachDetector--> edges --RevolutionTracker--> trusted revolutions
 *
 * All buffers are allocated here, once; `push` allocates nothing per sample (only small typed-array
 * views per block or chunk when copying).
 */

/**
 * ISO 20816-3 measurement band for broadband velocity: 10-1000 Hz, or 2-1000 Hz below 600 r/min.
 */
export function isoBand(speedRpm: number | null | undefined): { low: number; high: number } {
  return { low: speedRpm != null && speedRpm < 600 ? 2 : 10, high: 1000 };
}

/**
 * Largest shift between a channel's samples and the tach's instants the analyzer makes room for,
 * ticks: the serial protocol allows delays up to 1024 ticks plus a skew below 1 (PROTOCOL.md 2.6).
 */
export const MAX_TIMING_SHIFT_TICKS = 1026;

/**
 * Sampling at least 2.56 times the highest frequency of interest (common practice in vibration
 * analysers).
 */
export const MIN_SAMPLES_PER_HZ = 2.56;

export interface AnalyzerOptions {
  readonly config: Config;
  readonly sampleRate: number;
  readonly channelCount: number;
  /** Largest block `push` will see (samples per channel). */
  readonly maxBlock?: number;
  /**
   * Total samples per channel when known (recordings): the spectrum size is reduced for short
   * records.
   */
  readonly totalSamples?: number;
  /** True when the acquisition board times the tach itself (blocks carry tachEdges). */
  readonly boardTimesTach?: boolean;
  /** Description of the source for error messages (file name, device). */
  readonly sourceName?: string;
  /** Time constant of the live vectors, revolutions. */
  readonly liveRevolutions?: number;
  /** Also told of every averaged revolution and every gap (the speed-sweep recorder). */
  readonly revolutionTap?: RevolutionTap;
}

/**
 * A consumer of the trusted revolutions, beside the window's own average: called with each
 * revolution as the window's averagers cut it, one array of `dsp.resample_points` bin means of
 * acceleration (mm/s^2) per configured sensor, in config order, each read at that sensor's declared
 * delay, and the revolution's fractional sample bounds. It must copy what it needs at once: the
 * arrays are overwritten by the next revolution.
 */
export interface RevolutionTap {
  revolution(bins: readonly Float64Array[], start: number, end: number): void;
  /** Samples were lost: revolutions on either side are not one run. */
  gap(): void;
}

/**
 * Picks the spectrum size: the line spacing asked for, reduced so that short records still give
 * 2 segments.
 */
export function planSpectrumSize(
  sampleRate: number,
  resolutionHz: number,
  totalSamples?: number,
): number {
  let n = 16;
  while (sampleRate / n > resolutionHz) n *= 2;
  if (totalSamples !== undefined) {
    // At least two whole segments, but never coarser than 4 Hz lines.
    while (n > 16 && 2 * n > totalSamples && sampleRate / (n / 2) <= 4) n /= 2;
  }
  return n;
}

interface ChannelState {
  readonly id: string;
  readonly channel: number;
  readonly bearing: string;
  readonly direction: 'vertical' | 'horizontal' | 'axial';
  readonly mountingAngleDeg: number;
  readonly accel: AccelerationStage;
  readonly stats: RawStats;
  readonly shape: SignalFactsStage;
  readonly ring: SampleRing;
  readonly avg: SyncAverager;
  readonly decimator: Decimator;
  readonly spectrum: SpectrumAccumulator;
}

export class Analyzer {
  readonly sampleRate: number;
  /**
   * Sample rate of the spectrum after decimation, Hz (= sampleRate when the source is already
   * slow).
   */
  readonly spectrumRate: number;
  readonly spectrumSize: number;
  readonly orders: readonly number[];
  private readonly cfg: Config;
  private readonly chans: ChannelState[];
  private readonly scratch: Float32Array;
  private readonly syncScratch: Float32Array;
  private readonly detector: TachDetector;
  private readonly tracker: RevolutionTracker;
  private readonly tachChannel: number;
  private nextIndex: number | undefined;
  private windowStart: number | undefined;
  private gapSamples = 0;
  private sumPeriod = 0;
  private minPeriod = Infinity;
  private maxPeriod = 0;
  private rawEdges = 0;
  private firstRawEdge = NaN;
  private lastRawEdge = NaN;
  private readonly boardTimesTach: boolean;
  private livePeriod = 0;
  private lastRevEnd = NaN;
  private readonly liveDecay: number;
  private readonly tap: RevolutionTap | undefined;
  /** Per configured sensor, its averager's bins of the last revolution (handed to the tap). */
  private readonly tapBins: readonly Float64Array[];
  /** Declared timing delay of each source channel, ticks (version 2 boards; zeros otherwise). */
  private readonly delays: Float64Array;
  /** Revolutions waiting for their delayed samples (a small ring of [start, end]). */
  private readonly pendingStart = new Float64Array(64);
  private readonly pendingEnd = new Float64Array(64);
  private pendingHead = 0;
  private pendingCount = 0;

  constructor(opts: AnalyzerOptions) {
    const { config: cfg, sampleRate, channelCount } = opts;
    const src = opts.sourceName ?? 'source';
    this.cfg = cfg;
    this.sampleRate = sampleRate;
    this.boardTimesTach = opts.boardTimesTach ?? false;
    this.liveDecay = 1 - 1 / Math.max(1, opts.liveRevolutions ?? 32);
    const maxBlock = opts.maxBlock ?? 65536;
    this.delays = new Float64Array(channelCount);

    const lastCh = channelCount - 1;
    cfg.sensors.forEach((s, i) => {
      if (s.channel > lastCh) {
        throw new UserError(
          `sensors[${i}].channel`,
          `sensor ${s.id} is on channel ${s.channel} but ${src} has ` +
            `${channelCount} channel(s), numbered 0-${lastCh}`,
          'fix the channel number in the config, or use the recording made with this channel map',
        );
      }
    });
    if (!this.boardTimesTach && cfg.tach.channel > lastCh) {
      throw new UserError(
        'tach.channel',
        `the tach is on channel ${cfg.tach.channel} but ${src} has ` +
          `${channelCount} channel(s), numbered 0-${lastCh}`,
        'set tach.channel to the channel that carries the once-per-turn pulse',
      );
    }
    const bandHigh = cfg.dsp.band_hz?.high ?? 1000;
    if (sampleRate < MIN_SAMPLES_PER_HZ * bandHigh) {
      throw new UserError(
        src,
        `sample rate ${sampleRate} Hz is too low for the band up to ${bandHigh} Hz: it ` +
          `needs at least ${MIN_SAMPLES_PER_HZ * bandHigh} Hz (2.56 x the upper band edge)`,
        'record at a higher sample rate (25.6 kHz is usual)',
      );
    }

    // The spectrum only needs the band: decimate while the rate stays >= 2.56 x the band edge.
    const decimation = new DecimatorPlan(sampleRate, bandHigh, MIN_SAMPLES_PER_HZ * bandHigh);
    this.spectrumRate = decimation.outputRateHz;
    const rated = cfg.machine.rated_rpm;
    const resolution =
      cfg.dsp.spectrum_resolution_hz ?? (rated !== undefined && rated < 600 ? 0.25 : 1);
    const spectrumTotal =
      opts.totalSamples === undefined ? undefined : decimation.outputsFor(opts.totalSamples);
    this.spectrumSize = planSpectrumSize(this.spectrumRate, resolution, spectrumTotal);

    const orders = new Set(cfg.dsp.orders);
    if (cfg.machine.blades) orders.add(cfg.machine.blades);
    this.orders = [...orders].sort((a, b) => a - b);
    const maxOrder = this.orders[this.orders.length - 1]!;
    if (2 * maxOrder >= cfg.dsp.resample_points) {
      throw new UserError(
        'dsp.resample_points',
        `${cfg.dsp.resample_points} points per revolution cannot resolve order ${maxOrder}`,
        `raise dsp.resample_points above ${2 * maxOrder}`,
      );
    }

    const maxRevSamples = Math.ceil((60 * sampleRate) / cfg.tach.min_rpm) + 2;
    // Room for a revolution read up to MAX_TIMING_SHIFT_TICKS late or early (declared delays).
    const ringSize = maxRevSamples + maxBlock + 2 * MAX_TIMING_SHIFT_TICKS + 4;
    const plan = new SpectrumPlan(this.spectrumSize);
    const health = cfg.watcher.sensor_health;
    // The shape stage keeps 10 ms spans of the window: sized for the recording, or 1.5 live
    // windows.
    const maxWindowSamples =
      opts.totalSamples ?? Math.ceil(1.5 * cfg.watcher.window_s * sampleRate);
    this.chans = cfg.sensors.map((s) => ({
      id: s.id,
      channel: s.channel,
      bearing: s.bearing,
      direction: s.direction,
      mountingAngleDeg: s.mounting_angle_deg,
      accel: new AccelerationStage(s.sensitivity_mv_per_g, sampleRate),
      stats: new RawStats(s.full_scale_v ?? Infinity),
      shape: new SignalFactsStage({
        sampleRate,
        maxWindowSamples,
        spikeRatio: health.spike_ratio,
        oneSidedRatio: health.spike_one_sided_ratio,
      }),
      ring: new SampleRing(ringSize),
      avg: new SyncAverager(cfg.dsp.resample_points, opts.liveRevolutions),
      decimator: new Decimator(decimation),
      spectrum: new SpectrumAccumulator(plan),
    }));
    this.tapBins = this.chans.map((c) => c.avg.last);
    this.tap = opts.revolutionTap;
    this.scratch = new Float32Array(maxBlock);
    this.syncScratch = new Float32Array(maxBlock);
    this.tachChannel = cfg.tach.channel;
    const ppr = cfg.tach.pulses_per_rev;
    this.detector = new TachDetector({
      triggerV: cfg.tach.trigger_v,
      hysteresisV: cfg.tach.hysteresis_v ?? Math.max(0.05, 0.1 * Math.abs(cfg.tach.trigger_v)),
      maxBlock,
    });
    this.tracker = new RevolutionTracker(
      { pulsesPerRev: ppr, sampleRate, minRpm: cfg.tach.min_rpm, maxRpm: cfg.tach.max_rpm },
      (a, b) => this.onRevolution(a, b),
    );
  }

  /**
   * Ticks by which channel `c`'s samples must be read later than the tach's instants: the
   * channel's declared delay (ADC filter delay less its skew, from a version 2 board) less the
   * delay of what timed the tach (board-timed edges are true instants already; edges found on a
   * tach channel carry that channel's delay).
   */
  private shiftOf(c: ChannelState): number {
    return (
      this.delays[c.channel]! - (this.boardTimesTach ? 0 : (this.delays[this.tachChannel] ?? 0))
    );
  }

  private onRevolution(start: number, end: number): void {
    let lastNeeded = -Infinity;
    for (const c of this.chans) {
      const s = this.shiftOf(c);
      const { from, to } = c.avg.reach(start + s, end + s);
      if (from < 0 || from < c.ring.end - c.ring.data.length) return;
      lastNeeded = Math.max(lastNeeded, to);
    }
    // With a declared delay, or an edge within half a bin of the block's end, the revolution's last
    // samples may not have arrived yet: wait for them.
    if (lastNeeded >= (this.chans[0]?.ring.end ?? 0)) {
      // cannot happen with delays <= 1024 ticks; never grows
      if (this.pendingCount === this.pendingStart.length) return;
      const k = (this.pendingHead + this.pendingCount) % this.pendingStart.length;
      this.pendingStart[k] = start;
      this.pendingEnd[k] = end;
      this.pendingCount++;
      return;
    }
    this.addRevolution(start, end);
  }

  /**
   * Adds the waiting revolutions whose samples have all arrived (all, or drops the rest when
   * `gap`).
   */
  private drainPending(gap: boolean): void {
    const cap = this.pendingStart.length;
    while (this.pendingCount > 0) {
      const start = this.pendingStart[this.pendingHead]!;
      const end = this.pendingEnd[this.pendingHead]!;
      let ready = true;
      for (const c of this.chans) {
        const s = this.shiftOf(c);
        const { from, to } = c.avg.reach(start + s, end + s);
        if (!c.ring.holds(from, to)) ready = false;
      }
      if (!ready && !gap) return;
      this.pendingHead = (this.pendingHead + 1) % cap;
      this.pendingCount--;
      if (ready) this.addRevolution(start, end);
    }
  }

  private addRevolution(start: number, end: number): void {
    for (const c of this.chans) {
      const s = this.shiftOf(c);
      c.avg.addRevolution(c.ring, start + s, end + s);
    }
    this.tap?.revolution(this.tapBins, start, end);
    const p = end - start;
    this.livePeriod = this.livePeriod * this.liveDecay + p;
    this.lastRevEnd = end;
    this.sumPeriod += p;
    if (p < this.minPeriod) this.minPeriod = p;
    if (p > this.maxPeriod) this.maxPeriod = p;
  }

  private onGap(fromIndex: number, toIndex: number): void {
    this.drainPending(true);
    this.gapSamples += Math.max(0, toIndex - fromIndex);
    this.tap?.gap();
    this.tracker.reset();
    this.detector.reset();
    for (const c of this.chans) {
      c.accel.rebase();
      c.decimator.reset();
      c.spectrum.discardPartial();
    }
    this.nextIndex = toIndex;
  }

  push(item: SourceItem): void {
    if (item.kind === 'gap') {
      if (this.windowStart === undefined) this.windowStart = item.fromIndex;
      this.onGap(item.fromIndex, item.toIndex);
      return;
    }
    const start = item.startIndex;
    if (this.nextIndex !== undefined && start !== this.nextIndex) this.onGap(this.nextIndex, start);
    if (this.windowStart === undefined) this.windowStart = start;
    const n = item.channels[0]?.length ?? 0;
    if (n > this.scratch.length)
      throw new Error(`block of ${n} samples exceeds maxBlock ${this.scratch.length}`);
    const scratch = this.scratch;
    const sync = this.syncScratch;
    for (const c of this.chans) {
      const volts = item.channels[c.channel]!;
      c.stats.add(volts);
      c.shape.add(volts);
      c.accel.process(volts, scratch, sync);
      c.ring.write(sync, start, n);
      c.decimator.process(scratch, n, c.spectrum);
    }
    if (item.channelDelays) this.delays.set(item.channelDelays.subarray(0, this.delays.length));
    // Board-timed edges are used only when the config says the board times the tach
    // (board_tach_edges); otherwise the tach is found on its channel.
    if (this.boardTimesTach) {
      if (item.tachEdges)
        for (let i = 0; i < item.tachEdges.length; i++) this.onRawEdge(item.tachEdges[i]!);
    } else {
      const count = this.detector.process(item.channels[this.tachChannel]!, start);
      const edges = this.detector.edges;
      for (let i = 0; i < count; i++) this.onRawEdge(edges[i]!);
    }
    if (this.pendingCount > 0) this.drainPending(false);
    this.nextIndex = start + n;
  }

  private onRawEdge(t: number): void {
    if (this.rawEdges === 0) this.firstRawEdge = t;
    this.lastRawEdge = t;
    this.rawEdges++;
    this.tracker.edge(t);
  }

  /** Revolutions averaged so far in the current window. */
  get revolutions(): number {
    return this.chans[0]?.avg.revolutions ?? 0;
  }

  /**
   * Says in words why no revolution could be averaged, or null when the tach is fine.
   * For a recording this is an error; the live agent reports it as "tach lost".
   */
  diagnoseTach(): string | null {
    if (this.revolutions > 0) return null;
    const t = this.cfg.tach;
    const d = this.detector;
    if (!this.boardTimesTach && this.rawEdges === 0) {
      if (d.max === -Infinity) return `no samples were seen on tach channel ${t.channel}`;
      if (d.max < t.trigger_v) {
        return (
          `the tach on channel ${t.channel} never reached the ${t.trigger_v} V ` +
          `trigger (signal between ${d.min.toFixed(3)} and ${d.max.toFixed(3)} V): ` +
          `check tach.channel, tach.trigger_v and the pickup`
        );
      }
      return (
        `the tach on channel ${t.channel} never fell ` +
        `${(t.trigger_v - (t.hysteresis_v ?? Math.max(0.05, 0.1 * Math.abs(t.trigger_v)))).toFixed(2)} ` +
        `V below the trigger after rising (signal between ${d.min.toFixed(3)} and ` +
        `${d.max.toFixed(3)} V): check tach.trigger_v and tach.hysteresis_v`
      );
    }
    if (this.rawEdges < 3)
      return (
        `only ${this.rawEdges} tach pulse(s) found: the record is too ` +
        `short, or the speed is below tach.min_rpm (${t.min_rpm} r/min)`
      );
    const apparent =
      (60 * this.sampleRate * (this.rawEdges - 1)) /
      (this.lastRawEdge - this.firstRawEdge) /
      t.pulses_per_rev;
    if (apparent > t.max_rpm)
      return (
        `tach pulses imply about ${apparent.toFixed(0)} r/min, above ` +
        `tach.max_rpm (${t.max_rpm}): check tach.pulses_per_rev, or ` +
        `a noisy tach signal (raise tach.hysteresis_v)`
      );
    if (apparent < t.min_rpm)
      return (
        `tach pulses imply about ${apparent.toFixed(1)} r/min, ` +
        `below tach.min_rpm (${t.min_rpm})`
      );
    return (
      `${this.rawEdges} tach pulses found but their spacing is too irregular ` +
      `to trust any revolution (about ${apparent.toFixed(0)} r/min on ` +
      `average): check the pickup and tach.pulses_per_rev`
    );
  }

  /** Order vectors in velocity from an averaged revolution of acceleration. */
  private velocityOrders(
    sum: Float64Array,
    weight: number,
    fRev: number,
  ): Record<string, OrderVector> {
    const orders: Record<string, OrderVector> = {};
    for (const k of this.orders) {
      const v = velocityOrderComponent(sum, weight, k, fRev);
      orders[String(k)] = {
        order: k,
        freq_hz: k * fRev,
        amp_pk_mm_s: v.amp,
        amp_rms_mm_s: v.amp / Math.SQRT2,
        phase_deg: v.phaseDeg,
      };
    }
    return orders;
  }

  /** The live vectors now (cheap: a few hundred multiply-adds per channel). */
  liveFrame(): LiveFrame {
    const c0 = this.chans[0];
    const weight = c0?.avg.liveWeight ?? 0;
    const now = this.nextIndex ?? 0;
    const fRev = weight > 0 ? this.sampleRate / (this.livePeriod / weight) : null;
    return {
      sample_index: now,
      sample_rate_hz: this.sampleRate,
      speed_rpm: fRev !== null ? fRev * 60 : null,
      revolutions_weight: weight,
      age_s: Number.isNaN(this.lastRevEnd) ? Infinity : (now - this.lastRevEnd) / this.sampleRate,
      channels: this.chans.map((c) => ({
        id: c.id,
        orders: fRev !== null ? this.velocityOrders(c.avg.live, weight, fRev) : {},
      })),
    };
  }

  /** Closes the current window: results over everything since the previous call. */
  takeWindow(): WindowResult {
    const fs = this.sampleRate;
    const revs = this.revolutions;
    const meanPeriod = revs > 0 ? this.sumPeriod / revs : NaN;
    const speed = revs > 0 ? rpmFromPeriod(meanPeriod, fs) : null;
    const fRev = speed !== null ? speed / 60 : null;
    const band = this.cfg.dsp.band_hz ?? isoBand(speed ?? this.cfg.machine.rated_rpm);
    const N = this.spectrumSize;
    const df = this.spectrumRate / N;
    const warnings: string[] = [];
    const speedSpread = revs > 0 ? (this.maxPeriod - this.minPeriod) / meanPeriod : 0;

    const channels: ChannelResult[] = this.chans.map((c) => {
      const orders = revs > 0 && fRev !== null ? this.velocityOrders(c.avg.sum, revs, fRev) : {};
      const sp = c.spectrum;
      let overall: number | null = null;
      let peaks: ChannelResult['nonsync_peaks'] = [];
      if (sp.segments > 0) {
        const lines = velocityLinePower(
          sp.powerSum,
          sp.segments,
          N,
          sp.windowPower,
          this.spectrumRate,
        );
        overall = bandRms(lines, df, band.low, band.high);
        const tol = (h: number) => 3 * df + (fRev ?? 0) * h * (speedSpread / 2 + 0.005);
        peaks = nonSynchronousPeaks(
          lines,
          df,
          band.low,
          band.high,
          fRev,
          tol,
          Math.max(0.02 * overall, 1e-4),
          5,
        ).map((p) => ({
          freq_hz: p.freqHz,
          order: fRev ? p.freqHz / fRev : NaN,
          amp_rms_mm_s: p.rms,
        }));
      }
      const one = orders['1'];
      return {
        id: c.id,
        channel: c.channel,
        bearing: c.bearing,
        direction: c.direction,
        mounting_angle_deg: c.mountingAngleDeg,
        overall_rms_mm_s: overall,
        orders,
        one_x_share: one && overall ? one.amp_rms_mm_s / overall : null,
        nonsync_peaks: peaks,
        stats: {
          dc_v: c.stats.mean,
          ac_rms_v: c.stats.acRms,
          min_v: c.stats.samples ? c.stats.min : 0,
          max_v: c.stats.samples ? c.stats.max : 0,
          clipped_samples: c.stats.clipped,
          samples: c.stats.samples,
          ...(c.stats.samples ? { signal: c.shape.facts()! } : {}),
        },
      };
    });

    const segments = this.chans[0]?.spectrum.segments ?? 0;
    if (segments === 0)
      warnings.push(
        `no spectrum segment of ${(N / this.spectrumRate).toFixed(2)} s ` +
          `completed in this window: no overall level`,
      );
    if (revs > 0 && revs < 10)
      warnings.push(`only ${revs} revolution(s) averaged: order vectors are uncertain`);
    if (speedSpread > 0.05)
      warnings.push(
        `speed varied by ${(speedSpread * 100).toFixed(1)} % ` +
          `over the window: vectors are averaged over that range`,
      );
    if (speed !== null && speed < 600 && !this.cfg.dsp.band_hz && df > 0.3) {
      warnings.push(
        `below 600 r/min with ${df.toFixed(2)} Hz lines: set machine.rated_rpm or ` +
          `dsp.spectrum_resolution_hz (0.25 Hz) for an accurate 2-1000 Hz overall`,
      );
    }
    if (this.gapSamples > 0)
      warnings.push(`${this.gapSamples} samples lost to gaps in this window`);

    const result: WindowResult = {
      start_index: this.windowStart ?? this.nextIndex ?? 0,
      end_index: this.nextIndex ?? 0,
      sample_rate_hz: fs,
      speed_rpm: speed,
      speed_min_rpm: revs > 0 ? rpmFromPeriod(this.maxPeriod, fs) : null,
      speed_max_rpm: revs > 0 ? rpmFromPeriod(this.minPeriod, fs) : null,
      revolutions: revs,
      revolutions_rejected: this.tracker.revolutionsRejected,
      band_hz: band,
      spectrum_segments: segments,
      spectrum_resolution_hz: df,
      gap_samples: this.gapSamples,
      tach: {
        edges: this.tracker.edgesAccepted,
        missing_pulses: this.tracker.missingPulses,
        double_triggers: this.tracker.doubleTriggers,
        min_v: this.boardTimesTach || this.detector.min === Infinity ? null : this.detector.min,
        max_v: this.boardTimesTach || this.detector.max === -Infinity ? null : this.detector.max,
      },
      channels,
      warnings,
    };
    this.resetWindow();
    return result;
  }

  private resetWindow(): void {
    for (const c of this.chans) {
      c.avg.reset();
      c.spectrum.resetSums();
      c.stats.reset();
      c.shape.reset();
    }
    this.tracker.resetWindowStats();
    this.detector.resetWindowStats();
    this.sumPeriod = 0;
    this.minPeriod = Infinity;
    this.maxPeriod = 0;
    this.gapSamples = 0;
    this.rawEdges = 0;
    this.windowStart = this.nextIndex;
  }
}
