/**
 * Plays the acquisition board's side of the serial protocol: takes volts from a `BoardSignal`,
 * quantises them the way the board's ADC would (with clipping at full scale), and encodes frames.
 * Used by the tests and the benchmark through a real pseudo-terminal; the fan simulator can drive
 * it by implementing `BoardSignal`.
 */
import { constants } from 'node:fs';
import { open, type FileHandle } from 'node:fs/promises';
import { COUNT_RANGE, encodeFrame, type BoardTiming, type SampleFormat } from './frame.js';

/** Whatever produces the board's input signals, sample by sample on the board's clock. */
export interface BoardSignal {
  readonly channelCount: number;
  /**
   * Writes volts of board samples [first, first + n) into out[c][0 .. n), and the rising tach edges
   * that fall in that range (absolute fractional sample indices, ascending) into `edges`; returns
   * how many edges it wrote.
   */
  fill(first: number, n: number, out: readonly Float64Array[], edges: Float64Array): number;
}

export interface SineChannel {
  /** Zero-to-peak amplitude, volts. */
  readonly amp_v: number;
  /** Lag of the positive peak after the tach edge, degrees of rotation. */
  readonly lag_deg: number;
  /** DC level, volts. */
  readonly dc_v?: number;
}

/**
 * A shaft turning at constant speed: each channel a once-per-turn cosine whose positive peak lags
 * the tach edge by `lag_deg`, and a tach edge each time the shaft angle passes zero.
 */
export class SineTachSignal implements BoardSignal {
  readonly channelCount: number;
  private readonly samplesPerRev: number;

  constructor(
    private readonly sampleRateHz: number,
    rpm: number,
    private readonly channels: readonly SineChannel[],
    /** Board sample index of the first tach edge (may be fractional). */
    private readonly firstEdge = 0,
  ) {
    this.channelCount = channels.length;
    this.samplesPerRev = (sampleRateHz * 60) / rpm;
  }

  fill(first: number, n: number, out: readonly Float64Array[], edges: Float64Array): number {
    const w = (2 * Math.PI) / this.samplesPerRev;
    for (let c = 0; c < this.channels.length; c++) {
      const ch = this.channels[c]!;
      const lag = (ch.lag_deg * Math.PI) / 180;
      const dc = ch.dc_v ?? 0;
      const o = out[c]!;
      for (let i = 0; i < n; i++)
        o[i] = dc + ch.amp_v * Math.cos(w * (first + i - this.firstEdge) - lag);
    }
    let k = Math.ceil((first - this.firstEdge) / this.samplesPerRev);
    let count = 0;
    for (;;) {
      const e = this.firstEdge + k * this.samplesPerRev;
      if (e >= first + n) break;
      if (e >= first && count < edges.length) edges[count++] = e;
      k++;
    }
    return count;
  }
}

export interface BoardEmulatorOptions {
  readonly sampleRateHz: number;
  readonly samplesPerFrame: number;
  readonly format: SampleFormat;
  /** Volts per count, one per channel. */
  readonly scaleVPerCount: readonly number[];
  readonly offsetV?: readonly number[];
  /** Whether the board times the tach itself and sends the edges. */
  readonly tachTimed: boolean;
  readonly firstSample?: number;
  readonly firstSequence?: number;
  /**
   * Send version 2 frames declaring this timing. The emulator only declares it: a signal that
   * models the delay (values describing earlier instants, edges reported late) is the signal's job.
   */
  readonly timing?: BoardTiming;
}

export class BoardEmulator {
  private index: number;
  private sequence: number;
  private readonly volts: Float64Array[];
  private readonly raw: Float64Array[];
  private readonly edges = new Float64Array(1024);

  constructor(
    private readonly signal: BoardSignal,
    private readonly opts: BoardEmulatorOptions,
  ) {
    if (opts.scaleVPerCount.length !== signal.channelCount)
      throw new RangeError(
        `${opts.scaleVPerCount.length} scales for ${signal.channelCount} channels`,
      );
    this.index = opts.firstSample ?? 0;
    this.sequence = opts.firstSequence ?? 0;
    this.volts = Array.from(
      { length: signal.channelCount },
      () => new Float64Array(opts.samplesPerFrame),
    );
    this.raw = Array.from(
      { length: signal.channelCount },
      () => new Float64Array(opts.samplesPerFrame),
    );
  }

  /** Board sample index of the next frame's first sample. */
  get nextIndex(): number {
    return this.index;
  }

  get nextSequence(): number {
    return this.sequence;
  }

  /** Bytes of the next frame; advances the board's clock and sequence. */
  nextFrame(): Uint8Array {
    const n = this.opts.samplesPerFrame;
    const edgeCount = this.signal.fill(this.index, n, this.volts, this.edges);
    const offsets = this.opts.offsetV;
    for (let c = 0; c < this.volts.length; c++) {
      const scale = Math.fround(this.opts.scaleVPerCount[c]!);
      const offset = Math.fround(offsets ? offsets[c]! : 0);
      const v = this.volts[c]!;
      const r = this.raw[c]!;
      if (this.opts.format === 'float32') {
        for (let i = 0; i < n; i++) r[i] = (v[i]! - offset) / scale;
      } else {
        const { min, max } = COUNT_RANGE[this.opts.format];
        for (let i = 0; i < n; i++)
          r[i] = Math.min(max, Math.max(min, Math.round((v[i]! - offset) / scale)));
      }
    }
    const bytes = encodeFrame({
      sequence: this.sequence,
      firstSample: this.index,
      sampleRateHz: this.opts.sampleRateHz,
      format: this.opts.format,
      scaleVPerCount: this.opts.scaleVPerCount,
      offsetV: this.opts.offsetV,
      samples: this.raw,
      tachEdges: this.opts.tachTimed ? this.edges.subarray(0, edgeCount) : undefined,
      ...(this.opts.timing ? { timing: this.opts.timing } : {}),
    });
    this.skipFrame();
    return bytes;
  }

  /** The board loses a frame: its clock and sequence move on, nothing is sent. */
  skipFrame(): void {
    this.index += this.opts.samplesPerFrame;
    this.sequence = (this.sequence + 1) >>> 0;
  }

  /** The board restarts (power cycle): sample clock and sequence start again at 0. */
  restart(): void {
    this.index = 0;
    this.sequence = 0;
  }
}

/** The board end of a pseudo-terminal (or any character device), written with plain file writes. */
export class DeviceWriter {
  private constructor(private readonly fh: FileHandle) {}

  static async open(path: string): Promise<DeviceWriter> {
    // O_NOCTTY: never become this terminal's controlling process.
    return new DeviceWriter(await open(path, constants.O_RDWR | constants.O_NOCTTY));
  }

  async write(bytes: Uint8Array): Promise<void> {
    let off = 0;
    while (off < bytes.length) {
      const { bytesWritten } = await this.fh.write(bytes, off, bytes.length - off);
      off += bytesWritten;
    }
  }

  async close(): Promise<void> {
    await this.fh.close();
  }
}

/**
 * Sends frames in real time (one frame each samplesPerFrame / sampleRate seconds, on a schedule
 * that does not drift) until `until()` says stop or a write fails. Returns frames sent.
 */
export async function playRealtime(
  board: BoardEmulator,
  out: Pick<DeviceWriter, 'write'>,
  framePeriodMs: number,
  until: () => boolean,
): Promise<number> {
  const start = performance.now();
  let sent = 0;
  while (!until()) {
    await out.write(board.nextFrame());
    sent++;
    const due = start + sent * framePeriodMs;
    const wait = due - performance.now();
    if (wait > 1) await new Promise((r) => setTimeout(r, wait));
  }
  return sent;
}
