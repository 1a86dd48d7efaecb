/**
 * Faults of a serial line, injected into a stream of encoded frames on the board's side, so that
 * the agent's decoder, its gap reporting and the measurement core behind it can be tried against a
 * board (real or simulated) on a noisy link: bursts of garbage bytes between frames, and frames
 * with a bit flipped in their samples so that their CRC-32 fails.
 *
 * What the agent must make of them (PROTOCOL.md): garbage is skipped and costs no samples (a
 * resync, its bytes counted as skipped); a damaged frame is dropped whole, and its samples are a
 * gap with the frame's exact sample-clock bounds. The garbage never holds the sync word's first
 * byte (0xA5), so it cannot hide a false frame start: every injected byte is skipped and no intact
 * frame is lost to it.
 */
import { CRC_LEN, FRAME_SYNC } from './frame.js';

export interface FrameFaultOptions {
  /** After every N-th frame, a burst of garbage bytes (0 or absent: never). */
  readonly garbageEvery?: number;
  /** Bytes per garbage burst (default 64). */
  readonly garbageBytes?: number;
  /**
   * Every N-th frame goes out with one bit of its samples flipped: its CRC-32 fails (0 or absent:
   * never).
   */
  readonly corruptEvery?: number;
  /** Seed of the garbage bytes; the same seed gives the same bytes. */
  readonly seed?: number;
}

/** A frame sent damaged: the samples the agent must report as lost. */
export interface CorruptedFrame {
  readonly sequence: number;
  /** Board sample-clock index of the frame's first sample. */
  readonly first_sample: number;
  /** Samples per channel in the frame. */
  readonly samples: number;
}

export const DEFAULT_GARBAGE_BYTES = 64;

export class FrameFaults {
  /** Frames handed to apply(). */
  frames = 0;
  garbageBursts = 0;
  garbageBytes = 0;
  corruptedFrames = 0;
  private readonly every: { garbage: number; corrupt: number };
  private readonly burst: number;
  private state: number;

  constructor(
    opts: FrameFaultOptions,
    /** Called for every frame sent damaged. */
    private readonly onCorrupt?: (f: CorruptedFrame) => void,
  ) {
    for (const [k, v] of Object.entries({
      garbageEvery: opts.garbageEvery,
      corruptEvery: opts.corruptEvery,
      garbageBytes: opts.garbageBytes,
    })) {
      if (v !== undefined && !(Number.isInteger(v) && v >= 0))
        throw new RangeError(`${k} must be a whole number >= 0, got ${v}`);
    }
    this.every = { garbage: opts.garbageEvery ?? 0, corrupt: opts.corruptEvery ?? 0 };
    this.burst = opts.garbageBytes ?? DEFAULT_GARBAGE_BYTES;
    this.state = (opts.seed ?? 1) >>> 0 || 1;
  }

  /** Whether any fault is switched on. */
  get active(): boolean {
    return this.every.corrupt > 0 || (this.every.garbage > 0 && this.burst > 0);
  }

  /**
   * The bytes to send for one encoded frame: the frame (damaged when its turn has come), followed
   * by a garbage burst when its turn has come, in one piece so that a link dropping whole writes
   * never tears a frame. The frame passed in is not changed.
   */
  apply(frame: Uint8Array): Uint8Array {
    this.frames++;
    const corrupt = this.every.corrupt > 0 && this.frames % this.every.corrupt === 0;
    const garbage =
      this.every.garbage > 0 && this.burst > 0 && this.frames % this.every.garbage === 0
        ? this.burst
        : 0;
    if (!corrupt && garbage === 0) return frame;
    const out = new Uint8Array(frame.length + garbage);
    out.set(frame);
    if (corrupt) this.damage(out, frame.length);
    for (let i = frame.length; i < out.length; i++) out[i] = this.noiseByte();
    if (garbage > 0) {
      this.garbageBursts++;
      this.garbageBytes += garbage;
    }
    return out;
  }

  /**
   * Flips one bit in the middle of the frame's sample bytes (header layout of PROTOCOL.md, version
   * 1).
   */
  private damage(f: Uint8Array, length: number): void {
    const dv = new DataView(f.buffer, f.byteOffset, length);
    const headerLen = f[5]!;
    const entryLen = f[6]!;
    const channels = f[34]!;
    const edges = dv.getUint16(36, true);
    const samplesFrom = headerLen + channels * entryLen + edges * 8;
    const samplesTo = length - CRC_LEN;
    f[(samplesFrom + samplesTo) >> 1] ^= 0x10;
    this.corruptedFrames++;
    this.onCorrupt?.({
      sequence: dv.getUint32(12, true),
      first_sample: dv.getUint32(20, true) * 2 ** 32 + dv.getUint32(16, true),
      samples: dv.getUint16(32, true),
    });
  }

  /** xorshift32; the sync word's first byte is replaced so no false frame start can appear. */
  private noiseByte(): number {
    let x = this.state;
    x ^= x << 13;
    x ^= x >>> 17;
    x ^= x << 5;
    this.state = x >>> 0;
    const b = this.state & 0xff;
    return b === FRAME_SYNC[0] ? 0x42 : b;
  }
}
