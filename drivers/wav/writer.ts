import { open, type FileHandle } from 'node:fs/promises';
import { endianness } from 'node:os';
import { UserError } from '../../agent/errors.js';

/**
 * Streams a multichannel recording to disk as RIFF/WAVE, IEEE float32 samples (format tag 3, the
 * plain WAVEFORMATEX form that common readers accept), little-endian, channels interleaved in the
 * acquisition board's channel order, values in volts. Only one block is held in memory at a time;
 * the sizes in the header are patched when the writer is closed, then the file is fsync'ed.
 *
 * Layout: RIFF/WAVE, `fmt ` (18 bytes: tag 3, channels, rate, bytes/s, block align, 32 bits, cbSize
 * 0), `fact` (frames per channel, required for non-PCM data), `LIST`/`INFO` with `ISFT` (software)
 * and `ICMT` (comment, e.g. the channel map), then `data`.
 */

const WAVE_FORMAT_IEEE_FLOAT = 3;
/** Largest RIFF chunk size (32-bit field). */
const RIFF_MAX = 0xffffffff;

export interface WavWriterOptions {
  readonly sampleRate: number;
  readonly channelCount: number;
  /** Free text stored in the INFO/ICMT chunk (ASCII), e.g. the channel map. */
  readonly comment?: string;
  readonly software?: string;
}

function infoSubchunk(id: string, text: string): Buffer {
  const body = Buffer.from(text.replace(/[^\x20-\x7e\n]/g, '?') + '\0', 'latin1');
  const padded = body.length + (body.length & 1);
  const b = Buffer.alloc(8 + padded);
  b.write(id, 0, 'latin1');
  b.writeUInt32LE(body.length, 4);
  body.copy(b, 8);
  return b;
}

/**
 * Header bytes up to and including the `data` chunk id and size; `frames` may be 0 (patched later).
 */
export function wavHeader(
  opts: WavWriterOptions,
  frames: number,
): { header: Buffer; factOffset: number; dataSizeOffset: number } {
  const blockAlign = 4 * opts.channelCount;
  const info = Buffer.concat([
    Buffer.from('INFO', 'latin1'),
    infoSubchunk('ISFT', opts.software ?? 'turnwise'),
    ...(opts.comment ? [infoSubchunk('ICMT', opts.comment)] : []),
  ]);
  const size = 12 + (8 + 18) + (8 + 4) + (8 + info.length) + 8;
  const h = Buffer.alloc(size);
  let o = 0;
  const id = (s: string) => {
    h.write(s, o, 'latin1');
    o += 4;
  };
  const u32 = (v: number) => {
    h.writeUInt32LE(v, o);
    o += 4;
  };
  const u16 = (v: number) => {
    h.writeUInt16LE(v, o);
    o += 2;
  };
  const dataBytes = frames * blockAlign;
  id('RIFF');
  u32(size - 8 + dataBytes);
  id('WAVE');
  id('fmt ');
  u32(18);
  u16(WAVE_FORMAT_IEEE_FLOAT);
  u16(opts.channelCount);
  u32(opts.sampleRate);
  u32(opts.sampleRate * blockAlign);
  u16(blockAlign);
  u16(32);
  u16(0);
  id('fact');
  u32(4);
  const factOffset = o;
  u32(frames);
  id('LIST');
  u32(info.length);
  info.copy(h, o);
  o += info.length;
  id('data');
  const dataSizeOffset = o;
  u32(dataBytes);
  return { header: h, factOffset, dataSizeOffset };
}

/** Most frames a RIFF file of this channel count can hold. */
export function maxWavFrames(channelCount: number, headerBytes = 512): number {
  return Math.floor((RIFF_MAX - headerBytes) / (4 * channelCount));
}

export class WavWriter {
  private readonly fh: FileHandle;
  private readonly path: string;
  private readonly opts: WavWriterOptions;
  private readonly headerBytes: number;
  private readonly factOffset: number;
  private readonly dataSizeOffset: number;
  private readonly maxFrames: number;
  private buf: Buffer;
  private view: Float32Array;
  private frames = 0;
  private closed = false;

  private constructor(
    fh: FileHandle,
    path: string,
    opts: WavWriterOptions,
    head: ReturnType<typeof wavHeader>,
  ) {
    this.fh = fh;
    this.path = path;
    this.opts = opts;
    this.headerBytes = head.header.length;
    this.factOffset = head.factOffset;
    this.dataSizeOffset = head.dataSizeOffset;
    this.maxFrames = maxWavFrames(opts.channelCount, head.header.length);
    this.buf = Buffer.alloc(0);
    this.view = new Float32Array(0);
  }

  /** Creates (or truncates) the file and writes the header. */
  static async create(path: string, opts: WavWriterOptions): Promise<WavWriter> {
    if (!Number.isInteger(opts.sampleRate) || opts.sampleRate < 1)
      throw new Error(`sample rate must be a positive integer, got ${opts.sampleRate}`);
    // the block align (4 bytes x channels) is a 16-bit field
    if (!Number.isInteger(opts.channelCount) || opts.channelCount < 1 || opts.channelCount > 16383)
      throw new Error(`channel count out of range: ${opts.channelCount}`);
    let fh: FileHandle;
    try {
      fh = await open(path, 'w');
    } catch (e) {
      const code = (e as NodeJS.ErrnoException).code;
      throw new UserError(
        path,
        `cannot create the recording (${code ?? String(e)})`,
        code === 'ENOENT' ? 'create the folder first' : 'choose a writable path',
      );
    }
    const head = wavHeader(opts, 0);
    try {
      await fh.write(head.header, 0, head.header.length, 0);
    } catch (e) {
      // A full disk refuses the header: do not leave the file open.
      await fh.close().catch(() => undefined);
      throw e;
    }
    return new WavWriter(fh, path, opts, head);
  }

  get framesWritten(): number {
    return this.frames;
  }

  /** Appends `count` frames (samples per channel) from planar channel arrays, volts. */
  async write(channels: readonly Float32Array[], count: number): Promise<void> {
    if (this.closed) throw new Error('WavWriter.write after close');
    const ch = this.opts.channelCount;
    if (channels.length !== ch) throw new Error(`expected ${ch} channels, got ${channels.length}`);
    if (count === 0) return;
    if (this.frames + count > this.maxFrames) {
      throw new UserError(
        this.path,
        `the recording would pass the 4 GiB limit of a WAV ` +
          `file (${this.maxFrames} frames at ${ch} channels)`,
        'record fewer seconds per file',
      );
    }
    const bytes = count * ch * 4;
    if (this.buf.length < bytes) {
      this.view = new Float32Array(bytes / 4);
      this.buf = Buffer.from(this.view.buffer);
    }
    if (endianness() === 'LE') {
      const v = this.view;
      for (let c = 0; c < ch; c++) {
        const src = channels[c]!;
        for (let i = 0, j = c; i < count; i++, j += ch) v[j] = src[i]!;
      }
    } else {
      for (let c = 0; c < ch; c++) {
        const src = channels[c]!;
        for (let i = 0; i < count; i++) this.buf.writeFloatLE(src[i]!, (i * ch + c) * 4);
      }
    }
    await this.fh.write(this.buf, 0, bytes, this.headerBytes + this.frames * ch * 4);
    this.frames += count;
  }

  /** Closes the file without patching or flushing (after a failed write; the caller removes it). */
  async abandon(): Promise<void> {
    if (this.closed) return;
    this.closed = true;
    await this.fh.close().catch(() => undefined);
  }

  /**
   * Patches the sizes into the header, flushes to disk and closes. Returns the file size in bytes.
   */
  async close(): Promise<number> {
    if (this.closed) throw new Error('WavWriter closed twice');
    this.closed = true;
    try {
      const dataBytes = this.frames * this.opts.channelCount * 4;
      const total = this.headerBytes + dataBytes;
      const patch = Buffer.alloc(4);
      patch.writeUInt32LE(total - 8, 0);
      await this.fh.write(patch, 0, 4, 4);
      patch.writeUInt32LE(this.frames, 0);
      await this.fh.write(patch, 0, 4, this.factOffset);
      patch.writeUInt32LE(dataBytes, 0);
      await this.fh.write(patch, 0, 4, this.dataSizeOffset);
      await this.fh.sync();
      return total;
    } finally {
      await this.fh.close();
    }
  }
}
