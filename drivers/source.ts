/**
 * The one interface every acquisition source implements (recording, serial board, simulator).
 *
 * A source yields items in sample-clock order. Samples are volts, one Float32Array per channel,
 * all of the same length. `startIndex` is the sample-clock index of the first sample of the block.
 * When samples were lost, the source yields an explicit gap item before the next block; the DSP
 * never averages across a gap.
 */
export interface SampleBlock {
  readonly kind: 'samples';
  /** Sample-clock index of the first sample in this block. */
  readonly startIndex: number;
  /**
   * Volts, one array per acquisition channel, equal lengths. Valid until the next item is
   * requested.
   */
  readonly channels: readonly Float32Array[];
  /**
   * Rising tach edges timed by the acquisition board, as fractional sample-clock indices
   * (absolute, not relative to the block). Absent when the board does not time the tach itself;
   * the DSP then finds edges on the tach channel.
   */
  readonly tachEdges?: Float64Array;
  /**
   * Live sources: wall-clock time (ms) at which the block's last sample was received. The runtime
   * anchors the sample clock to it (never to "sample 0 = agent start"). Absent for recordings and
   * the simulator, whose time is their start time plus index over rate.
   */
  readonly arrivedMs?: number;
  /**
   * Sample-clock ticks by which each channel's samples lag the instant their index names (the ADC's
   * filter delay plus the channel's skew inside a multiplexed sample), one per channel; absent: 0.
   * Tach edges in `tachEdges` are already true instants (the board's tach delay removed).
   */
  readonly channelDelays?: Float64Array;
}

export interface GapMarker {
  readonly kind: 'gap';
  /** First sample-clock index that is missing. */
  readonly fromIndex: number;
  /** First sample-clock index present again (exclusive end of the gap). */
  readonly toIndex: number;
  /** Why samples were lost, in words (e.g. "sequence jump 41 -> 44", "device unplugged"). */
  readonly reason: string;
  /**
   * The source's sample clock restarted (board power cycle or reset): the length of the gap is an
   * estimate, and wall-clock times must be anchored again at the next block.
   */
  readonly clockRestart?: boolean;
}

export type SourceItem = SampleBlock | GapMarker;

export interface SourceInfo {
  /** Samples per second per channel. */
  readonly sampleRate: number;
  /** Number of acquisition channels in every block. */
  readonly channelCount: number;
  /** Human-readable description, e.g. the file name or device path. */
  readonly description: string;
  /** Total samples per channel when known in advance (recordings), for progress display. */
  readonly totalSamples?: number;
}

/** Counters and states a live source reports for the heartbeat; field names carry their units. */
export type SourceHealth = Readonly<Record<string, number | string | boolean | null>>;

export interface SampleSource {
  /** Opens the source and reads its format. Rejects with a UserError naming the problem. */
  open(): Promise<SourceInfo>;
  /** Yields items until the source ends (recording) or close() is called (live). */
  items(): AsyncIterable<SourceItem>;
  close(): Promise<void>;
  /** Live sources: health counters (frames, errors, gaps, reconnects ...) for the heartbeat. */
  health?(): SourceHealth;
}
