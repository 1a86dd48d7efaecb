import type { SampleSource, SourceInfo, SourceItem } from '../../drivers/source.js';
import type { Clock } from '../clock.js';
import type { Config } from '../config/schema.js';
import { Analyzer, type RevolutionTap } from '../dsp/analyzer.js';
import type { LiveFrame, WindowResult } from '../dsp/types.js';
import type { Logger } from '../log.js';
import { BurstLog } from '../burst-log.js';
import { SampleTimeline, type TimelineHealth } from './sample-time.js';

/**
 * The agent's main loop: source -> DSP -> window consumers (watcher, outputs) and live consumers.
 *
 * Time inside the loop is the sample clock: a window closes every `windowSeconds` of samples and a
 * live frame goes out every `liveSeconds` of samples, so a recording or a simulation run faster
 * than real time behaves exactly as the live fan would. The wall-clock time of a sample comes from
 * the sample clock anchored to the wall clock (`SampleTimeline`): for a live board at the arrival
 * of the first block after every start of the agent or restart of the board, then slewed and
 * checked for wall-clock steps; for recordings and simulations at the source's start time.
 */

export interface WindowConsumer {
  /** Called once per closed window, in order; `atMs` is the wall-clock time of the window's end. */
  onWindow(w: WindowResult, atMs: number): void | Promise<void>;
}

export interface LiveConsumer {
  onLive(f: LiveFrame, atMs: number): void;
}

/** Sees every source item as it arrives, before the DSP (the event captures' raw ring). */
export interface RawTap {
  onItem(item: SourceItem): void;
  /** At the end of the run: finish what is pending. */
  close(): Promise<void>;
}

export interface RuntimeOptions {
  readonly config: Config;
  readonly source: SampleSource;
  readonly clock: Clock;
  readonly logger: Logger;
  readonly windowSeconds: number;
  readonly liveSeconds: number;
  readonly liveRevolutions?: number;
  readonly windowConsumers: readonly WindowConsumer[];
  readonly liveConsumers: readonly LiveConsumer[];
  /** Wall-clock time of sample 0, ms; default: the clock when the source opened. */
  readonly startMs?: number;
  /**
   * Seconds of (simulated) calendar per second of samples: a simulation at time_scale 3600 plays an
   * hour a second.
   */
  readonly timeScale?: number;
  /** True when blocks carry board-timed tach edges. */
  readonly boardTimesTach?: boolean;
  /** Built once the source is open (it needs the sample rate and channel count). */
  readonly rawTap?: (
    info: SourceInfo,
    timeOf: (index: number) => number,
    maxBlock: number,
  ) => RawTap;
  /**
   * Built once the source is open: sees every trusted revolution (the sweep recorder's speed
   * points).
   */
  readonly revolutionTap?: (info: SourceInfo, timeOf: (index: number) => number) => RevolutionTap;
  /**
   * A live block later or earlier than its stamped time by more than this is a wall-clock step, ms.
   */
  readonly clockStepToleranceMs?: number;
}

/** What the loop has handled so far (for the heartbeat while it runs, and the summary). */
export interface RuntimeCounts {
  /** Analysis windows closed. */
  readonly windows: number;
  /** Samples per channel received. */
  readonly samples: number;
  /** Gap markers received from the source (samples lost before they reached the DSP). */
  readonly gaps: number;
}

export interface RunSummary extends RuntimeCounts {
  readonly info: SourceInfo;
}

export class AgentRuntime {
  private analyzer: Analyzer | undefined;
  private stopped = false;
  private stopTimer: ReturnType<typeof setTimeout> | null = null;
  private windows = 0;
  private samples = 0;
  private gaps = 0;
  private timeline: SampleTimeline | null = null;

  constructor(private readonly opts: RuntimeOptions) {}

  /** The time anchoring's counters (for the heartbeat); null before the source opened. */
  timeHealth(): TimelineHealth | null {
    return this.timeline?.health() ?? null;
  }

  /**
   * Runs until the source ends or stop() is called; rejects only on programming errors or a failing
   * consumer.
   */
  async run(): Promise<RunSummary> {
    const { source, config, clock, logger } = this.opts;
    const info = await source.open();
    const fs = info.sampleRate;
    const startMs = this.opts.startMs ?? clock.now();
    const maxBlock = 1 << 16;
    // Wall-clock steps and board restarts are logged once per burst, and counted in timeHealth().
    const stepLog = new BurstLog(logger, { nowMs: () => clock.now(), quietMs: 60_000 });
    const timeline = new SampleTimeline({
      sampleRate: fs,
      timeScale: this.opts.timeScale,
      stepToleranceMs:
        this.opts.clockStepToleranceMs ??
        (config.acquisition?.driver === 'serial'
          ? config.acquisition.clock_step_tolerance_ms
          : undefined),
      onStep: (kind, detail, stepMs) =>
        stepLog.report(kind, `${info.description}: ${detail}`, { step_ms: Math.round(stepMs) }),
    });
    this.timeline = timeline;
    const timeOf = (index: number) => timeline.timeOf(index);
    const an = new Analyzer({
      config,
      sampleRate: fs,
      channelCount: info.channelCount,
      maxBlock,
      boardTimesTach: this.opts.boardTimesTach,
      sourceName: info.description,
      liveRevolutions: this.opts.liveRevolutions,
      revolutionTap: this.opts.revolutionTap?.(info, timeOf),
    });
    this.analyzer = an;
    logger.info(
      { source: info.description, sample_rate_hz: fs, channels: info.channelCount },
      'acquisition started',
    );
    const windowSamples = Math.round(this.opts.windowSeconds * fs);
    const liveSamples = Math.max(1, Math.round(this.opts.liveSeconds * fs));
    let windowEnd = windowSamples;
    let nextLive = liveSamples;
    let first: number | undefined;
    const tap = this.opts.rawTap?.(info, timeOf, maxBlock);
    try {
      for await (const item of source.items()) {
        if (this.stopped) break;
        tap?.onItem(item);
        if (item.kind === 'gap') {
          this.gaps++;
          if (item.clockRestart) timeline.restart();
          an.push(item);
          continue;
        }
        const n = item.channels[0]?.length ?? 0;
        if (item.arrivedMs !== undefined) timeline.observe(item.startIndex + n, item.arrivedMs);
        else if (!timeline.isAnchored) timeline.anchor(item.startIndex, startMs);
        if (first === undefined) {
          first = item.startIndex;
          windowEnd = first + windowSamples;
          nextLive = first + liveSamples;
        }
        // Split blocks larger than the analyzer's buffers.
        for (let off = 0; off < n; off += maxBlock) {
          const len = Math.min(maxBlock, n - off);
          if (off === 0 && len === n) {
            an.push(item);
            continue;
          }
          const from = item.startIndex + off;
          const edges = item.tachEdges?.filter((t) => t >= from && t < from + len);
          an.push({
            kind: 'samples',
            startIndex: from,
            channels: item.channels.map((c) => c.subarray(off, off + len)),
            ...(edges ? { tachEdges: edges } : {}),
          });
        }
        this.samples += n;
        const end = item.startIndex + n;
        if (end >= nextLive) {
          const f = an.liveFrame();
          for (const c of this.opts.liveConsumers) c.onLive(f, timeOf(end));
          while (nextLive <= end) nextLive += liveSamples;
        }
        if (end >= windowEnd) {
          const w = an.takeWindow();
          this.windows++;
          for (const c of this.opts.windowConsumers) await c.onWindow(w, timeOf(end));
          // Windows stay on a fixed grid of the sample clock, whatever the block size.
          while (windowEnd <= end) windowEnd += windowSamples;
        }
      }
    } finally {
      stepLog.flush(true);
      if (this.stopTimer) clearTimeout(this.stopTimer);
      await source.close();
      await tap?.close();
    }
    const counts = this.counts();
    logger.info({ ...counts }, 'acquisition ended');
    return { info, ...counts };
  }

  counts(): RuntimeCounts {
    return { windows: this.windows, samples: this.samples, gaps: this.gaps };
  }

  stop(): void {
    if (this.stopped) return;
    this.stopped = true;
    // The loop notices at the next item. A live source with nothing to deliver (a serial board
    // unplugged) would keep it waiting: close the source if the loop has not ended within a second.
    this.stopTimer = setTimeout(() => void this.opts.source.close().catch(() => {}), 1000);
  }
}
