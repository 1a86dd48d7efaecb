import { open, type FileHandle } from 'node:fs/promises';
import { UserError } from '../../agent/errors.js';
import type { SampleSource, SourceInfo, SourceItem } from '../source.js';

/**
 * Streams a RIFF/WAVE recording as blocks of volts. Supports PCM 16/24/32-bit integers and IEEE
 * float 32, plain or WAVE_FORMAT_EXTENSIBLE. The file is read block by block, never whole.
 *
 * Float files hold volts directly. Integer PCM full scale maps to `pcmFullScaleV` volts
 * (default 10 V, the usual +/-10 V input range of acquisition boards).
 */

const WAVE_FORMAT_PCM = 0x0001;
const WAVE_FORMAT_IEEE_FLOAT = 0x0003;
const WAVE_FORMAT_EXTENSIBLE = 0xfffe;

export type WavSampleFormat = 'pcm16' | 'pcm24' | 'pcm32' | 'float32';

export interface WavFormat {
  readonly format: WavSampleFormat;
  readonly channels: number;
  readonly sampleRate: number;
  readonly blockAlign: number;
  /** Byte offset of the first sample in the file. */
  readonly dataOffset: number;
  /** Whole frames in the data chunk. */
  readonly frames: number;
}

export interface WavReaderOptions {
  /** Frames per block yielded. */
  readonly blockFrames?: number;
  /** Volts at integer full scale. */
  readonly pcmFullScaleV?: number;
}

function fail(
  file: string,
  what: string,
  hint = 'check that the file is a complete RIFF/WAVE recording (PCM 16/24/32-bit or float 32)',
): never {
  throw new UserError(file, what, hint);
}

async function readExactly(
  fh: FileHandle,
  buf: Buffer,
  pos: number,
  length: number,
): Promise<number> {
  let got = 0;
  while (got < length) {
    const { bytesRead } = await fh.read(buf, got, length - got, pos + got);
    if (bytesRead === 0) break;
    got += bytesRead;
  }
  return got;
}

/** Parses the RIFF header and chunk list up to the data chunk. */
export async function readWavFormat(fh: FileHandle, file: string): Promise<WavFormat> {
  const size = (await fh.stat()).size;
  const head = Buffer.alloc(12);
  if ((await readExactly(fh, head, 0, 12)) < 12)
    fail(file, `too short to be a WAV file (${size} bytes)`);
  if (head.toString('ascii', 0, 4) !== 'RIFF' || head.toString('ascii', 8, 12) !== 'WAVE') {
    const tag =
      head.toString('ascii', 0, 4) === 'RF64'
        ? 'an RF64 file (not supported; split it into WAV files under 4 GB)'
        : 'not a RIFF/WAVE file';
    fail(file, tag);
  }
  let pos = 12;
  let fmt: Omit<WavFormat, 'dataOffset' | 'frames'> | undefined;
  const chunkHead = Buffer.alloc(8);
  while (pos + 8 <= size) {
    await readExactly(fh, chunkHead, pos, 8);
    const id = chunkHead.toString('ascii', 0, 4);
    const len = chunkHead.readUInt32LE(4);
    const body = pos + 8;
    if (id === 'fmt ') {
      if (len < 16) fail(file, `fmt chunk is ${len} bytes, needs at least 16`);
      const f = Buffer.alloc(Math.min(len, 40));
      if ((await readExactly(fh, f, body, f.length)) < f.length)
        fail(file, 'truncated inside the fmt chunk');
      let tag = f.readUInt16LE(0);
      const channels = f.readUInt16LE(2);
      const sampleRate = f.readUInt32LE(4);
      const blockAlign = f.readUInt16LE(12);
      const bits = f.readUInt16LE(14);
      if (tag === WAVE_FORMAT_EXTENSIBLE) {
        if (len < 40) fail(file, `WAVE_FORMAT_EXTENSIBLE fmt chunk is ${len} bytes, needs 40`);
        // SubFormat GUID: its first two bytes carry the plain format tag.
        tag = f.readUInt16LE(24);
      }
      let format: WavSampleFormat | undefined;
      if (tag === WAVE_FORMAT_PCM && (bits === 16 || bits === 24 || bits === 32))
        format = `pcm${bits}` as WavSampleFormat;
      else if (tag === WAVE_FORMAT_IEEE_FLOAT && bits === 32) format = 'float32';
      if (!format) {
        const kind =
          tag === WAVE_FORMAT_PCM
            ? 'PCM'
            : tag === WAVE_FORMAT_IEEE_FLOAT
              ? 'IEEE float'
              : `format tag 0x${tag.toString(16)}`;
        fail(
          file,
          `unsupported sample format: ${kind}, ${bits} bits`,
          'convert it to PCM 16/24/32-bit or float 32',
        );
      }
      if (channels < 1) fail(file, 'fmt chunk declares 0 channels');
      if (sampleRate < 1) fail(file, 'fmt chunk declares a sample rate of 0 Hz');
      if (blockAlign !== channels * (bits / 8))
        fail(file, `block align ${blockAlign} does not match ${channels} channels x ${bits} bits`);
      fmt = { format, channels, sampleRate, blockAlign };
    } else if (id === 'data') {
      if (!fmt) fail(file, 'data chunk comes before the fmt chunk');
      const available = size - body;
      if (len > available) {
        fail(
          file,
          `truncated: the data chunk declares ${len} bytes but only ${available} are in ` +
            `the file (${((len - available) / fmt.blockAlign / fmt.sampleRate).toFixed(2)} s ` +
            `missing)`,
          'the recording was cut short; re-copy it, or repair the header to the length present',
        );
      }
      if (len % fmt.blockAlign !== 0)
        fail(
          file,
          `the data chunk (${len} bytes) ends inside a sample frame of ${fmt.blockAlign} bytes`,
        );
      return { ...fmt, dataOffset: body, frames: len / fmt.blockAlign };
    }
    pos = body + len + (len & 1);
  }
  fail(file, fmt ? 'no data chunk found' : 'no fmt chunk found');
}

export class WavSource implements SampleSource {
  private fh: FileHandle | undefined;
  private fmt: WavFormat | undefined;
  private readonly blockFrames: number;
  private readonly pcmFullScaleV: number;
  private closed = false;

  constructor(
    private readonly file: string,
    opts: WavReaderOptions = {},
  ) {
    this.blockFrames = opts.blockFrames ?? 4096;
    this.pcmFullScaleV = opts.pcmFullScaleV ?? 10;
  }

  async open(): Promise<SourceInfo> {
    try {
      this.fh = await open(this.file, 'r');
    } catch (e) {
      const code = (e as NodeJS.ErrnoException).code;
      throw new UserError(
        this.file,
        code === 'ENOENT' ? 'recording not found' : `cannot open recording (${code})`,
        'give the path of a .wav recording',
      );
    }
    try {
      this.fmt = await readWavFormat(this.fh, this.file);
    } catch (e) {
      await this.close();
      throw e;
    }
    return {
      sampleRate: this.fmt.sampleRate,
      channelCount: this.fmt.channels,
      description: this.file,
      totalSamples: this.fmt.frames,
    };
  }

  get format(): WavFormat | undefined {
    return this.fmt;
  }

  async *items(): AsyncIterable<SourceItem> {
    const fh = this.fh;
    const fmt = this.fmt;
    if (!fh || !fmt) throw new Error('WavSource.items() called before open()');
    const { channels: nch, blockAlign } = fmt;
    const buf = Buffer.alloc(this.blockFrames * blockAlign);
    const view = new DataView(buf.buffer, buf.byteOffset, buf.byteLength);
    const out: Float32Array[] = Array.from(
      { length: nch },
      () => new Float32Array(this.blockFrames),
    );
    const intScale = (bits: number) => this.pcmFullScaleV / 2 ** (bits - 1);
    let frame = 0;
    while (frame < fmt.frames && !this.closed) {
      const n = Math.min(this.blockFrames, fmt.frames - frame);
      const want = n * blockAlign;
      const got = await readExactly(fh, buf, fmt.dataOffset + frame * blockAlign, want);
      if (got < want) {
        throw new UserError(
          this.file,
          `truncated: read stopped at sample ` +
            `${frame + Math.floor(got / blockAlign)} of ${fmt.frames}`,
          'the file changed or was cut while being read',
        );
      }
      const outs = n === this.blockFrames ? out : out.map((a) => a.subarray(0, n));
      decodeInterleaved(
        fmt.format,
        view,
        n,
        nch,
        outs,
        fmt.format === 'float32' ? 1 : intScale(Number(fmt.format.slice(3))),
      );
      yield { kind: 'samples', startIndex: frame, channels: outs };
      frame += n;
    }
  }

  async close(): Promise<void> {
    this.closed = true;
    const fh = this.fh;
    this.fh = undefined;
    await fh?.close();
  }
}

/** Decodes `frames` interleaved frames from `view` into one array per channel. */
export function decodeInterleaved(
  format: WavSampleFormat,
  view: DataView,
  frames: number,
  nch: number,
  out: readonly Float32Array[],
  scale: number,
): void {
  for (let c = 0; c < nch; c++) {
    const dst = out[c]!;
    switch (format) {
      case 'pcm16': {
        for (let i = 0, p = c * 2; i < frames; i++, p += nch * 2)
          dst[i] = view.getInt16(p, true) * scale;
        break;
      }
      case 'pcm24': {
        for (let i = 0, p = c * 3; i < frames; i++, p += nch * 3) {
          const u = view.getUint8(p) | (view.getUint8(p + 1) << 8) | (view.getUint8(p + 2) << 16);
          dst[i] = ((u << 8) >> 8) * scale;
        }
        break;
      }
      case 'pcm32': {
        for (let i = 0, p = c * 4; i < frames; i++, p += nch * 4)
          dst[i] = view.getInt32(p, true) * scale;
        break;
      }
      case 'float32': {
        for (let i = 0, p = c * 4; i < frames; i++, p += nch * 4) dst[i] = view.getFloat32(p, true);
        break;
      }
    }
  }
}
