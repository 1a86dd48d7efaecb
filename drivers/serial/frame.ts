/**
 * The turnwise serial frame protocol, versions 1 and 2 (specified for firmware authors in
 * PROTOCOL.md): a pure encoder and a chunk-driven decoder. Version 2 adds the board's timing
 * declaration (ADC delay, tach delay, per-channel skew); version 1 frames decode as before.
 *
 * The decoder copies each chunk into one preallocated buffer, finds frames by their sync word with
 * Buffer.indexOf (no per-byte handler), checks the header, the length and the CRC-32, and decodes
 * the samples into Float32Arrays sized once for the largest frame seen and then reused. After
 * garbage or a damaged frame it rescans from the byte after the failed sync word, so it is back in
 * step at the next intact frame. Sequence numbers and sample-clock indices are checked across
 * frames; missing samples are reported as gap markers with exact sample-clock bounds.
 */
import { crc32 as zlibCrc32 } from 'node:zlib';
import type { GapMarker } from '../source.js';

export const FRAME_SYNC: Readonly<Uint8Array> = Uint8Array.of(0xa5, 0x5a, 0x54, 0x57);
/** Version 1 frames carry no timing declaration; kept byte for byte. */
export const PROTOCOL_VERSION = 1;
/** Version 2: the board declares its ADC delay, tach delay and per-channel skew. */
export const PROTOCOL_VERSION_TIMED = 2;
/** Versions this decoder reads. */
export const PROTOCOL_VERSIONS: readonly number[] = [1, 2];
/** Length of the fixed header version 1 writes; later minor additions make it longer. */
export const HEADER_LEN_V1 = 40;
/** Bytes per channel-table entry version 1 writes (f32 scale, f32 offset). */
export const CHANNEL_ENTRY_LEN_V1 = 8;
/** Version 2 fixed header: version 1's plus f32 sample_delay_ticks and f32 tach_delay_ticks. */
export const HEADER_LEN_V2 = 48;
/** Version 2 channel entry: version 1's plus f32 skew_ticks. */
export const CHANNEL_ENTRY_LEN_V2 = 12;
/**
 * Largest ADC or tach delay a board may declare, ticks (sigma-delta filters delay tens of samples).
 */
export const MAX_DELAY_TICKS = 1024;
export const TACH_EDGE_LEN = 8;
export const CRC_LEN = 4;
/** Flags bit 0: the board times the tach itself; the edge list is authoritative even when empty. */
export const FLAG_TACH_TIMED = 0x01;

export type SampleFormat = 'int16' | 'int24' | 'float32';
export const SAMPLE_FORMAT_CODE: Readonly<Record<SampleFormat, number>> = {
  int16: 1,
  int24: 2,
  float32: 3,
};
const FORMAT_BY_CODE: readonly (SampleFormat | undefined)[] = [
  undefined,
  'int16',
  'int24',
  'float32',
];
export const BYTES_PER_SAMPLE: Readonly<Record<SampleFormat, number>> = {
  int16: 2,
  int24: 3,
  float32: 4,
};
/** Largest and smallest raw count of each integer format (two's complement). */
export const COUNT_RANGE: Readonly<
  Record<'int16' | 'int24', { readonly min: number; readonly max: number }>
> = {
  int16: { min: -32768, max: 32767 },
  int24: { min: -8388608, max: 8388607 },
};

const TWO_POW_32 = 4294967296;
/** Largest board sample index the decoder accepts: indices stay exact in a float64. */
const MAX_SAMPLE_INDEX = Number.MAX_SAFE_INTEGER;

/**
 * CRC-32 as used by IEEE 802.3 and zlib (CRC-32/ISO-HDLC): polynomial 0x04C11DB7 processed
 * reflected (0xEDB88320), initial value 0xFFFFFFFF, input and output reflected, final XOR
 * 0xFFFFFFFF. Check value: CRC of ASCII "123456789" = 0xCBF43926.
 */
export function crc32(bytes: Uint8Array): number {
  return zlibCrc32(bytes) >>> 0;
}

/** Total bytes of a frame with these contents (version 1 unless `version` says 2). */
export function frameLength(
  channelCount: number,
  samplesPerChannel: number,
  format: SampleFormat,
  tachEdgeCount: number,
  version: 1 | 2 = 1,
): number {
  const [h, e] =
    version === 2 ? [HEADER_LEN_V2, CHANNEL_ENTRY_LEN_V2] : [HEADER_LEN_V1, CHANNEL_ENTRY_LEN_V1];
  return (
    h +
    channelCount * e +
    tachEdgeCount * TACH_EDGE_LEN +
    samplesPerChannel * channelCount * BYTES_PER_SAMPLE[format] +
    CRC_LEN
  );
}

/** A version 2 board's timing declaration (PROTOCOL.md 2.6). */
export interface BoardTiming {
  /**
   * The value indexed i describes the input at tick i - sampleDelayTicks (+ the channel's skew).
   */
  readonly sampleDelayTicks: number;
  /** A board-timed edge reported at tick t happened at t - tachDelayTicks. */
  readonly tachDelayTicks: number;
  /**
   * Per channel, how long after the sample instant it is converted, ticks, 0 <= skew < 1 (all 0:
   * simultaneous).
   */
  readonly skewTicks: ArrayLike<number>;
}

/** Why a timing declaration is impossible, or null when it is fine. */
export function timingFault(t: {
  sampleDelayTicks: number;
  tachDelayTicks: number;
  skewTicks: ArrayLike<number>;
}): string | null {
  const d = t.sampleDelayTicks;
  if (!Number.isFinite(d) || d < 0 || d > MAX_DELAY_TICKS)
    return `sample_delay_ticks ${d} outside 0..${MAX_DELAY_TICKS}`;
  const td = t.tachDelayTicks;
  if (!Number.isFinite(td) || td < 0 || td > MAX_DELAY_TICKS)
    return `tach_delay_ticks ${td} outside 0..${MAX_DELAY_TICKS}`;
  for (let c = 0; c < t.skewTicks.length; c++) {
    const s = t.skewTicks[c]!;
    if (!Number.isFinite(s) || s < 0 || s >= 1)
      return (
        `channel ${c} skew_ticks ${s} outside 0 to below ` +
        `1 (a channel is converted within its sample period)`
      );
  }
  return null;
}

export interface FrameContent {
  /** Frame counter, 0 .. 2^32-1, wrapping; +1 per frame sent. */
  readonly sequence: number;
  /** Board sample-clock index of the first sample in the frame. */
  readonly firstSample: number;
  readonly sampleRateHz: number;
  readonly format: SampleFormat;
  /** Volts per count, one per channel (stored as float32). */
  readonly scaleVPerCount: ArrayLike<number>;
  /** Volts added after scaling, one per channel (stored as float32); zero when absent. */
  readonly offsetV?: ArrayLike<number>;
  /**
   * Raw values, one array per channel, all of the same length: integer counts for int16/int24,
   * values for float32 (volts = value x scale + offset in every format).
   */
  readonly samples: readonly ArrayLike<number>[];
  /**
   * Rising tach edges timed by the board, absolute fractional sample-clock indices inside
   * [firstSample, firstSample + samples per channel). Undefined: the board does not time the tach.
   */
  readonly tachEdges?: ArrayLike<number>;
  /**
   * Present: a version 2 frame declaring this timing; absent: a version 1 frame. Encoded as given
   * (not checked), so tests can send impossible ones.
   */
  readonly timing?: BoardTiming;
}

/**
 * Encodes one version 1 frame, or version 2 when `timing` is given. Pure; throws RangeError on
 * content that cannot be encoded.
 */
export function encodeFrame(c: FrameContent): Uint8Array {
  const channelCount = c.samples.length;
  if (channelCount < 1 || channelCount > 255)
    throw new RangeError(`channel count ${channelCount} outside 1..255`);
  if (c.scaleVPerCount.length !== channelCount)
    throw new RangeError(`${c.scaleVPerCount.length} scale(s) for ${channelCount} channel(s)`);
  if (c.offsetV && c.offsetV.length !== channelCount)
    throw new RangeError(`${c.offsetV.length} offset(s) for ${channelCount} channel(s)`);
  const spc = c.samples[0]!.length;
  if (spc < 1 || spc > 65535) throw new RangeError(`samples per channel ${spc} outside 1..65535`);
  for (const ch of c.samples)
    if (ch.length !== spc) throw new RangeError('channels of different lengths');
  if (!Number.isInteger(c.firstSample) || c.firstSample < 0 || c.firstSample > MAX_SAMPLE_INDEX)
    throw new RangeError(`first sample ${c.firstSample} is not an index`);
  if (!Number.isInteger(c.sequence) || c.sequence < 0 || c.sequence >= TWO_POW_32)
    throw new RangeError(`sequence ${c.sequence} outside 0..2^32-1`);
  const edges = c.tachEdges;
  const edgeCount = edges ? edges.length : 0;
  if (edgeCount > 65535) throw new RangeError(`${edgeCount} tach edges in one frame`);

  const timing = c.timing;
  if (timing && timing.skewTicks.length !== channelCount)
    throw new RangeError(`${timing.skewTicks.length} skew(s) for ${channelCount} channel(s)`);
  const headerLen = timing ? HEADER_LEN_V2 : HEADER_LEN_V1;
  const entryLen = timing ? CHANNEL_ENTRY_LEN_V2 : CHANNEL_ENTRY_LEN_V1;
  const total = frameLength(channelCount, spc, c.format, edgeCount, timing ? 2 : 1);
  const out = new Uint8Array(total);
  const dv = new DataView(out.buffer);
  out.set(FRAME_SYNC, 0);
  dv.setUint8(4, timing ? PROTOCOL_VERSION_TIMED : PROTOCOL_VERSION);
  dv.setUint8(5, headerLen);
  dv.setUint8(6, entryLen);
  dv.setUint8(7, SAMPLE_FORMAT_CODE[c.format]);
  dv.setUint32(8, total, true);
  dv.setUint32(12, c.sequence, true);
  dv.setUint32(16, c.firstSample % TWO_POW_32, true);
  dv.setUint32(20, Math.floor(c.firstSample / TWO_POW_32), true);
  dv.setFloat64(24, c.sampleRateHz, true);
  dv.setUint16(32, spc, true);
  dv.setUint8(34, channelCount);
  dv.setUint8(35, edges ? FLAG_TACH_TIMED : 0);
  dv.setUint16(36, edgeCount, true);
  dv.setUint16(38, 0, true);
  if (timing) {
    dv.setFloat32(40, timing.sampleDelayTicks, true);
    dv.setFloat32(44, timing.tachDelayTicks, true);
  }

  let o = headerLen;
  for (let ch = 0; ch < channelCount; ch++) {
    dv.setFloat32(o, c.scaleVPerCount[ch]!, true);
    dv.setFloat32(o + 4, c.offsetV ? c.offsetV[ch]! : 0, true);
    if (timing) dv.setFloat32(o + 8, timing.skewTicks[ch]!, true);
    o += entryLen;
  }
  for (let i = 0; i < edgeCount; i++) {
    const e = edges![i]!;
    let whole = Math.floor(e);
    let frac = Math.round((e - whole) * TWO_POW_32);
    if (frac === TWO_POW_32) {
      whole += 1;
      frac = 0;
    }
    const rel = whole - c.firstSample;
    if (!(rel >= 0 && rel < spc))
      throw new RangeError(
        `tach edge ${e} outside the frame's samples [${c.firstSample}, ${c.firstSample + spc})`,
      );
    dv.setUint32(o, rel, true);
    dv.setUint32(o + 4, frac, true);
    o += TACH_EDGE_LEN;
  }
  const bps = BYTES_PER_SAMPLE[c.format];
  for (let i = 0; i < spc; i++) {
    for (let ch = 0; ch < channelCount; ch++) {
      const v = c.samples[ch]![i]!;
      if (c.format === 'float32') dv.setFloat32(o, v, true);
      else {
        const r = COUNT_RANGE[c.format];
        if (!Number.isInteger(v) || v < r.min || v > r.max)
          throw new RangeError(`count ${v} outside ${c.format} range`);
        if (c.format === 'int16') dv.setInt16(o, v, true);
        else {
          out[o] = v & 0xff;
          out[o + 1] = (v >> 8) & 0xff;
          out[o + 2] = (v >> 16) & 0xff;
        }
      }
      o += bps;
    }
  }
  dv.setUint32(o, crc32(out.subarray(0, o)), true);
  return out;
}

/**
 * One decoded frame. The decoder reuses this object and its arrays: valid only during
 * `FrameSink.frame`.
 */
export class DecodedFrame {
  sequence = 0;
  /** First sample's index on the board's own sample clock. */
  boardFirstSample = 0;
  /** First sample's index on the output clock (equals the board's until the board restarts). */
  startIndex = 0;
  sampleRateHz = 0;
  format: SampleFormat = 'int24';
  samplesPerChannel = 0;
  /** Volts, one view per channel, length `samplesPerChannel`. */
  channels: readonly Float32Array[] = [];
  /**
   * Rising tach edges, absolute fractional output-clock indices; undefined when the board does not
   * time the tach.
   */
  tachEdges: Float64Array | undefined = undefined;
  /**
   * Per-channel timing delay in ticks (version 2 frames: ADC delay + channel skew); undefined for
   * version 1.
   */
  channelDelays: Float64Array | undefined = undefined;
}

export type DecodeProblem =
  | 'crc'
  | 'bad_length'
  | 'bad_header'
  | 'rejected'
  | 'resync'
  | 'gap'
  | 'sequence'
  | 'clock_restart'
  | 'timing';

export interface FrameSink {
  /** A good frame, in order. `f` and its arrays are reused after the call returns. */
  frame(f: DecodedFrame): void;
  /** Samples are missing before the next frame. */
  gap(g: GapMarker): void;
  /** Something went wrong or looked odd; for logging (once per burst) and last-error reporting. */
  problem(kind: DecodeProblem, detail: string): void;
}

export interface DecoderLimits {
  /** Frames longer than this are rejected as bad lengths; the buffer holds twice this. */
  readonly maxFrameBytes: number;
  readonly maxChannels: number;
  readonly maxSamplesPerChannel: number;
  readonly maxTachEdges: number;
}

export const DEFAULT_LIMITS: DecoderLimits = {
  maxFrameBytes: 262_144,
  maxChannels: 64,
  maxSamplesPerChannel: 8192,
  maxTachEdges: 256,
};

/**
 * Default tolerance on the declared sample rate against the configured one, ppm
 * (acquisition.sample_rate_tolerance_ppm).
 */
export const DEFAULT_RATE_TOLERANCE_PPM = 100;

export interface DecoderOptions {
  readonly limits?: Partial<DecoderLimits>;
  /** Frames that do not match are rejected (counted, and their samples reported as lost). */
  readonly expect?: {
    readonly channelCount?: number;
    readonly sampleRateHz?: number;
    readonly sampleRateTolerancePpm?: number;
  };
  /** Wall clock, ms; used only to estimate what was lost when the board's sample clock restarts. */
  readonly nowMs?: () => number;
}

/** Counters since the decoder was made. Field names are those of the health report. */
export interface DecoderCounters {
  bytes_received: number;
  frames_ok: number;
  crc_errors: number;
  /** Length fields that contradict each other or exceed the limits. */
  bad_lengths: number;
  /** Unknown version or sample format, impossible counts, tach edges outside the frame. */
  bad_headers: number;
  /** Intact frames that do not match the configured channel count or sample rate. */
  rejected_frames: number;
  /** Times the decoder lost step and had to search for the next sync word. */
  resyncs: number;
  /**
   * Bytes that were not part of any good frame (garbage, damaged frames, partial frames at
   * disconnect).
   */
  bytes_skipped: number;
  gaps: number;
  samples_lost: number;
  /** Sequence numbers that jumped while the sample clock stayed continuous (no samples lost). */
  sequence_anomalies: number;
  /** Times the board's sample clock went backwards (board restarted). */
  clock_restarts: number;
  /**
   * Version 2 frames whose timing declaration was impossible (their samples were used with the last
   * good declaration).
   */
  timing_faults: number;
}

function zeroCounters(): DecoderCounters {
  return {
    bytes_received: 0,
    frames_ok: 0,
    crc_errors: 0,
    bad_lengths: 0,
    bad_headers: 0,
    rejected_frames: 0,
    resyncs: 0,
    bytes_skipped: 0,
    gaps: 0,
    samples_lost: 0,
    sequence_anomalies: 0,
    clock_restarts: 0,
    timing_faults: 0,
  };
}

/** The timing in use, for the health report. */
export interface TimingState {
  /** Version of the last good frame (0 before the first). */
  protocolVersion: number;
  /** True once a version 2 frame declared a valid timing. */
  declared: boolean;
  sampleDelayTicks: number;
  tachDelayTicks: number;
  maxSkewTicks: number;
}

/** What went wrong between the last good frame and the next, to explain a gap. */
interface SinceLastGood {
  crc: number;
  badLength: number;
  badHeader: number;
  rejected: number;
  skipped: number;
  linkDown: string | null;
}

const SYNC_BUF = Buffer.from(FRAME_SYNC);

export class FrameDecoder {
  readonly counters: DecoderCounters = zeroCounters();
  private readonly limits: DecoderLimits;
  private readonly expectChannels: number | undefined;
  private readonly expectRate: number | undefined;
  private readonly rateTolerance: number;
  private readonly nowMs: () => number;
  /** The timing in use (the last valid declaration; zeros until one arrives). */
  readonly timing: TimingState = {
    protocolVersion: 0,
    declared: false,
    sampleDelayTicks: 0,
    tachDelayTicks: 0,
    maxSkewTicks: 0,
  };
  private readonly skews: Float64Array;
  private readonly goodSkews: Float64Array;
  private readonly delays: Float64Array;
  private delayView: Float64Array | null = null;

  private readonly buf: Buffer;
  private readonly dv: DataView;
  private len = 0;
  private skipping = false;

  /** Decoded samples; grown to the largest frame seen (channels x samples), then reused. */
  private chanBufs: Float32Array[] = [];
  private chanCap = 0;
  private readonly edgeBuf: Float64Array;
  private readonly scales: Float64Array;
  private readonly offsets: Float64Array;
  private views: Float32Array[] = [];
  private viewSpc = -1;
  private readonly emptyEdges = new Float64Array(0);
  private readonly out = new DecodedFrame();

  /** Continuity: next expected board index and sequence, and board -> output clock offset. */
  private nextBoardIndex: number | null = null;
  private nextSequence = 0;
  private lastRate = 0;
  private lastGoodMs = 0;
  private clockOffset = 0;
  private readonly since: SinceLastGood = {
    crc: 0,
    badLength: 0,
    badHeader: 0,
    rejected: 0,
    skipped: 0,
    linkDown: null,
  };

  constructor(
    private readonly sink: FrameSink,
    opts: DecoderOptions = {},
  ) {
    this.limits = { ...DEFAULT_LIMITS, ...opts.limits };
    const l = this.limits;
    if (l.maxFrameBytes < HEADER_LEN_V1 + CHANNEL_ENTRY_LEN_V1 + CRC_LEN + 2)
      throw new RangeError(`maxFrameBytes ${l.maxFrameBytes} is too small`);
    this.expectChannels = opts.expect?.channelCount;
    this.expectRate = opts.expect?.sampleRateHz;
    this.rateTolerance = (opts.expect?.sampleRateTolerancePpm ?? DEFAULT_RATE_TOLERANCE_PPM) * 1e-6;
    this.nowMs = opts.nowMs ?? Date.now;
    this.buf = Buffer.alloc(Math.max(2 * l.maxFrameBytes, 65_536));
    this.dv = new DataView(this.buf.buffer, this.buf.byteOffset, this.buf.byteLength);
    this.edgeBuf = new Float64Array(l.maxTachEdges);
    this.scales = new Float64Array(l.maxChannels);
    this.offsets = new Float64Array(l.maxChannels);
    this.skews = new Float64Array(l.maxChannels);
    this.goodSkews = new Float64Array(l.maxChannels);
    this.delays = new Float64Array(l.maxChannels);
  }

  /** Bytes held while waiting for the rest of a frame. */
  get bufferedBytes(): number {
    return this.len;
  }

  /** Feeds bytes as they arrived; calls the sink for every frame, gap and problem found. */
  push(chunk: Uint8Array): void {
    this.counters.bytes_received += chunk.length;
    let off = 0;
    while (off < chunk.length) {
      const n = Math.min(this.buf.length - this.len, chunk.length - off);
      this.buf.set(chunk.subarray(off, off + n), this.len);
      this.len += n;
      off += n;
      const consumed = this.parse();
      if (consumed > 0) {
        this.buf.copyWithin(0, consumed, this.len);
        this.len -= consumed;
      }
    }
  }

  /**
   * The link went down (device closed or unplugged): drops the partial frame held (counted as
   * skipped) and remembers why, so the gap reported when frames resume says so. Sequence and
   * sample-clock tracking carry on, so the gap's bounds stay exact if the board kept counting.
   */
  linkDown(reason: string): void {
    if (this.len > 0) this.skip(this.len);
    this.len = 0;
    this.since.linkDown = reason;
    this.skipping = false;
  }

  private skip(n: number): void {
    if (n <= 0) return;
    this.counters.bytes_skipped += n;
    this.since.skipped += n;
    if (!this.skipping) {
      this.skipping = true;
      this.counters.resyncs++;
      this.sink.problem('resync', 'lost step in the byte stream; searching for the next frame');
    }
  }

  /** Parses what the buffer holds; returns how many leading bytes are finished with. */
  private parse(): number {
    const buf = this.buf;
    const dv = this.dv;
    const end = this.len;
    let pos = 0;
    for (;;) {
      const avail = end - pos;
      if (avail < FRAME_SYNC.length) return pos;
      if (
        buf[pos] !== 0xa5 ||
        buf[pos + 1] !== 0x5a ||
        buf[pos + 2] !== 0x54 ||
        buf[pos + 3] !== 0x57
      ) {
        // Out of step: search the filled part only (the rest of the buffer holds stale bytes).
        const at = buf.subarray(0, end).indexOf(SYNC_BUF, pos);
        if (at < 0) {
          // Keep the last 3 bytes: they may be the start of a sync word.
          const keepFrom = end - (FRAME_SYNC.length - 1);
          this.skip(keepFrom - pos);
          return keepFrom;
        }
        this.skip(at - pos);
        pos = at;
        continue;
      }
      if (avail < HEADER_LEN_V1) return pos;

      const version = buf[pos + 4]!;
      const headerLen = buf[pos + 5]!;
      const entryLen = buf[pos + 6]!;
      const format = FORMAT_BY_CODE[buf[pos + 7]!];
      const total = dv.getUint32(pos + 8, true);
      const spc = dv.getUint16(pos + 32, true);
      const channelCount = buf[pos + 34]!;
      const flags = buf[pos + 35]!;
      const edgeCount = dv.getUint16(pos + 36, true);
      const l = this.limits;

      let headerFault: string | null = null;
      const minHeader = version === PROTOCOL_VERSION_TIMED ? HEADER_LEN_V2 : HEADER_LEN_V1;
      const minEntry =
        version === PROTOCOL_VERSION_TIMED ? CHANNEL_ENTRY_LEN_V2 : CHANNEL_ENTRY_LEN_V1;
      if (version !== PROTOCOL_VERSION && version !== PROTOCOL_VERSION_TIMED)
        headerFault =
          `protocol version ${version} (this agent reads ` +
          `versions ${PROTOCOL_VERSIONS.join(' and ')})`;
      else if (headerLen < minHeader)
        headerFault = `header length ${headerLen} below ${minHeader} (version ${version})`;
      else if (entryLen < minEntry)
        headerFault = `channel entry length ${entryLen} below ${minEntry} (version ${version})`;
      else if (!format) headerFault = `unknown sample format code ${buf[pos + 7]}`;
      else if (channelCount < 1 || channelCount > l.maxChannels)
        headerFault = `channel count ${channelCount} outside 1..${l.maxChannels}`;
      if (headerFault) {
        this.counters.bad_headers++;
        this.since.badHeader++;
        this.sink.problem('bad_header', `bad frame header: ${headerFault}`);
        this.skip(1);
        pos += 1;
        continue;
      }
      const expectedTotal =
        headerLen +
        channelCount * entryLen +
        edgeCount * TACH_EDGE_LEN +
        spc * channelCount * BYTES_PER_SAMPLE[format!] +
        CRC_LEN;
      let lengthFault: string | null = null;
      if (spc < 1 || spc > l.maxSamplesPerChannel)
        lengthFault = `samples per channel ${spc} outside 1..${l.maxSamplesPerChannel}`;
      else if (edgeCount > l.maxTachEdges)
        lengthFault = `${edgeCount} tach edges, above the limit ${l.maxTachEdges}`;
      else if (total !== expectedTotal)
        lengthFault = `frame length ${total} but its header describes ${expectedTotal} bytes`;
      else if (total > l.maxFrameBytes)
        lengthFault = `frame length ${total} above the limit ${l.maxFrameBytes}`;
      if (lengthFault) {
        this.counters.bad_lengths++;
        this.since.badLength++;
        this.sink.problem('bad_length', `bad frame length: ${lengthFault}`);
        this.skip(1);
        pos += 1;
        continue;
      }
      if (avail < total) return pos;

      const crcAt = pos + total - CRC_LEN;
      const wanted = dv.getUint32(crcAt, true);
      const got = crc32(buf.subarray(pos, crcAt));
      if (wanted !== got) {
        this.counters.crc_errors++;
        this.since.crc++;
        this.sink.problem(
          'crc',
          `CRC mismatch in frame ${dv.getUint32(pos + 12, true)}: ` +
            `stored 0x${wanted.toString(16).padStart(8, '0')}, computed ` +
            `0x${got.toString(16).padStart(8, '0')}`,
        );
        this.skip(1);
        pos += 1;
        continue;
      }

      const accepted = this.accept(
        pos,
        version,
        headerLen,
        entryLen,
        format!,
        channelCount,
        spc,
        flags,
        edgeCount,
      );
      this.skipping = false;
      if (!accepted) {
        // Intact but unusable: its bytes count as skipped; the gap shows at the next good frame.
        this.counters.bytes_skipped += total;
        this.since.skipped += total;
      }
      pos += total;
    }
  }

  /** Decodes an intact frame at `pos` and hands it on. Returns false when the frame is rejected. */
  private accept(
    pos: number,
    version: number,
    headerLen: number,
    entryLen: number,
    format: SampleFormat,
    channelCount: number,
    spc: number,
    flags: number,
    edgeCount: number,
  ): boolean {
    const buf = this.buf;
    const dv = this.dv;
    const sequence = dv.getUint32(pos + 12, true);
    const lo = dv.getUint32(pos + 16, true);
    const hi = dv.getUint32(pos + 20, true);
    const boardFirst = hi * TWO_POW_32 + lo;
    const rate = dv.getFloat64(pos + 24, true);

    const reject = (kind: 'bad_header' | 'rejected', why: string): false => {
      if (kind === 'bad_header') {
        this.counters.bad_headers++;
        this.since.badHeader++;
      } else {
        this.counters.rejected_frames++;
        this.since.rejected++;
      }
      this.sink.problem(kind, `frame ${sequence} rejected: ${why}`);
      return false;
    };
    if (boardFirst > MAX_SAMPLE_INDEX)
      return reject('bad_header', `first sample index ${boardFirst} above 2^53`);
    if (!(rate > 0) || !Number.isFinite(rate))
      return reject('bad_header', `sample rate ${rate} Hz`);
    if (this.expectChannels !== undefined && channelCount !== this.expectChannels) {
      return reject(
        'rejected',
        `${channelCount} channel(s), the configuration ` +
          `says ${this.expectChannels} (acquisition.channels)`,
      );
    }
    if (
      this.expectRate !== undefined &&
      Math.abs(rate - this.expectRate) > this.rateTolerance * this.expectRate
    ) {
      const ppm = ((rate - this.expectRate) / this.expectRate) * 1e6;
      return reject(
        'rejected',
        `sample rate ${rate} Hz declared, ${ppm >= 0 ? '+' : ''}${ppm.toFixed(0)} ppm ` +
          `from the configured ${this.expectRate} Hz, beyond the tolerance of ` +
          `${(this.rateTolerance * 1e6).toFixed(0)} ppm: set acquisition.sample_rate_hz ` +
          `to the board's rate (or widen acquisition.sample_rate_tolerance_ppm)`,
      );
    }
    const timed = version === PROTOCOL_VERSION_TIMED;
    const sampleDelay = timed ? dv.getFloat32(pos + 40, true) : 0;
    const tachDelay = timed ? dv.getFloat32(pos + 44, true) : 0;

    let o = pos + headerLen;
    for (let ch = 0; ch < channelCount; ch++) {
      const scale = dv.getFloat32(o, true);
      const offset = dv.getFloat32(o + 4, true);
      if (!Number.isFinite(scale) || !Number.isFinite(offset))
        return reject(
          'bad_header',
          `channel ${ch} scale ${scale} V/count or offset ${offset} V is not finite`,
        );
      this.scales[ch] = scale;
      this.offsets[ch] = offset;
      if (timed) this.skews[ch] = dv.getFloat32(o + 8, true);
      o += entryLen;
    }
    // An impossible timing declaration does not stop monitoring: it is counted and reported, and
    // the samples are placed with the last good declaration (zeros if none came yet).
    const tm = this.timing;
    if (timed) {
      const fault = timingFault({
        sampleDelayTicks: sampleDelay,
        tachDelayTicks: tachDelay,
        skewTicks: this.skews.subarray(0, channelCount),
      });
      if (fault) {
        this.counters.timing_faults++;
        this.sink.problem(
          'timing',
          `frame ${sequence}: impossible timing declaration (${fault}); its ` +
            `samples are used with the last good declaration ` +
            `(${tm.declared ? `sample delay ${tm.sampleDelayTicks} ticks, tach delay ${tm.tachDelayTicks} ticks` : 'none yet: no delay compensation'}): ` +
            `fix the board's firmware (PROTOCOL.md 2.6)`,
        );
      } else {
        tm.declared = true;
        tm.sampleDelayTicks = sampleDelay;
        tm.tachDelayTicks = tachDelay;
        let mx = 0;
        for (let ch = 0; ch < channelCount; ch++) {
          this.goodSkews[ch] = this.skews[ch]!;
          if (this.skews[ch]! > mx) mx = this.skews[ch]!;
        }
        tm.maxSkewTicks = mx;
      }
    }
    tm.protocolVersion = version;
    const tachShift = timed ? tm.tachDelayTicks : 0;
    // Tach edges are decoded relative to the board clock here; shifted to the output clock below.
    for (let i = 0; i < edgeCount; i++) {
      const rel = dv.getUint32(o, true);
      if (rel >= spc)
        return reject('bad_header', `tach edge at sample ${rel} of a ${spc}-sample frame`);
      this.edgeBuf[i] = boardFirst + rel + dv.getUint32(o + 4, true) / TWO_POW_32 - tachShift;
      o += TACH_EDGE_LEN;
    }

    if (spc > this.chanCap || channelCount > this.chanBufs.length) {
      this.chanCap = Math.max(spc, this.chanCap);
      this.chanBufs = Array.from(
        { length: Math.max(channelCount, this.chanBufs.length) },
        () => new Float32Array(this.chanCap),
      );
      this.viewSpc = -1;
    }
    if (spc !== this.viewSpc || this.views.length !== channelCount) {
      this.views = this.chanBufs.slice(0, channelCount).map((b) => b.subarray(0, spc));
      this.viewSpc = spc;
    }
    const views = this.views;
    const bps = BYTES_PER_SAMPLE[format];
    if (format === 'int24') {
      for (let i = 0; i < spc; i++) {
        for (let ch = 0; ch < channelCount; ch++) {
          const count = ((buf[o]! | (buf[o + 1]! << 8) | (buf[o + 2]! << 16)) << 8) >> 8;
          views[ch]![i] = count * this.scales[ch]! + this.offsets[ch]!;
          o += 3;
        }
      }
    } else if (format === 'int16') {
      for (let i = 0; i < spc; i++) {
        for (let ch = 0; ch < channelCount; ch++) {
          views[ch]![i] = dv.getInt16(o, true) * this.scales[ch]! + this.offsets[ch]!;
          o += 2;
        }
      }
    } else {
      for (let i = 0; i < spc; i++) {
        for (let ch = 0; ch < channelCount; ch++) {
          const v = dv.getFloat32(o, true);
          if (!Number.isFinite(v))
            return reject('bad_header', `sample ${i} of channel ${ch} is ${v}`);
          views[ch]![i] = v * this.scales[ch]! + this.offsets[ch]!;
          o += bps;
        }
      }
    }

    this.checkContinuity(sequence, boardFirst, spc, rate);
    const out = this.out;
    out.sequence = sequence;
    out.boardFirstSample = boardFirst;
    out.startIndex = boardFirst + this.clockOffset;
    out.sampleRateHz = rate;
    out.format = format;
    out.samplesPerChannel = spc;
    out.channels = views;
    if (flags & FLAG_TACH_TIMED) {
      if (edgeCount === 0) out.tachEdges = this.emptyEdges;
      else {
        for (let i = 0; i < edgeCount; i++) this.edgeBuf[i] = this.edgeBuf[i]! + this.clockOffset;
        out.tachEdges = this.edgeBuf.subarray(0, edgeCount);
      }
    } else out.tachEdges = undefined;
    if (timed && tm.declared) {
      if (!this.delayView || this.delayView.length !== channelCount)
        this.delayView = this.delays.subarray(0, channelCount);
      for (let ch = 0; ch < channelCount; ch++)
        this.delayView[ch] = tm.sampleDelayTicks - this.goodSkews[ch]!;
      out.channelDelays = this.delayView;
    } else out.channelDelays = undefined;

    this.counters.frames_ok++;
    this.nextBoardIndex = boardFirst + spc;
    this.nextSequence = (sequence + 1) >>> 0;
    this.lastRate = rate;
    this.lastGoodMs = this.nowMs();
    const s = this.since;
    s.crc = s.badLength = s.badHeader = s.rejected = s.skipped = 0;
    s.linkDown = null;
    this.sink.frame(out);
    return true;
  }

  /**
   * Compares a good frame with the one before it; reports gaps and moves the output clock on a
   * board restart.
   */
  private checkContinuity(sequence: number, boardFirst: number, spc: number, rate: number): void {
    const expected = this.nextBoardIndex;
    if (expected === null) return;
    const prevSeq = (this.nextSequence - 1) >>> 0;
    if (boardFirst === expected) {
      if (sequence !== this.nextSequence) {
        this.counters.sequence_anomalies++;
        this.sink.problem(
          'sequence',
          `sequence jumped ${prevSeq} -> ${sequence} but ` +
            `the sample clock is continuous (no samples lost)`,
        );
      }
      return;
    }
    let from: number;
    let to: number;
    let what: string;
    let restart = false;
    if (boardFirst > expected) {
      from = expected + this.clockOffset;
      to = boardFirst + this.clockOffset;
      const missingFrames = (sequence - this.nextSequence) >>> 0;
      what =
        missingFrames > 0
          ? `sequence jump ${prevSeq} -> ${sequence} (${missingFrames} frame(s) missing)`
          : `board sample clock jumped ahead by ${boardFirst - expected} samples ` +
            `with the sequence continuous (board-side overrun)`;
    } else {
      // The board's clock went backwards: it restarted. How much was lost is only known from the
      // wall clock: the time since the last good frame, less this frame's own duration.
      this.counters.clock_restarts++;
      restart = true;
      const elapsedMs = Math.max(0, this.nowMs() - this.lastGoodMs);
      const estimate = Math.max(1, Math.round((elapsedMs / 1000) * (this.lastRate || rate)) - spc);
      from = expected + this.clockOffset;
      to = from + estimate;
      this.clockOffset = to - boardFirst;
      what =
        `board sample clock restarted (index ${expected} expected, ` +
        `${boardFirst} received; sequence ${prevSeq} -> ${sequence}); ` +
        `samples lost estimated from the wall clock`;
      this.sink.problem('clock_restart', what);
    }
    const reason = this.describeCause(what);
    this.counters.gaps++;
    this.counters.samples_lost += to - from;
    this.sink.problem('gap', `${to - from} samples lost (${from} .. ${to}): ${reason}`);
    this.sink.gap(
      restart
        ? { kind: 'gap', fromIndex: from, toIndex: to, reason, clockRestart: true }
        : { kind: 'gap', fromIndex: from, toIndex: to, reason },
    );
  }

  private describeCause(what: string): string {
    const s = this.since;
    const parts: string[] = [];
    if (s.linkDown) parts.push(s.linkDown);
    if (s.crc) parts.push(`${s.crc} CRC error(s)`);
    if (s.badLength) parts.push(`${s.badLength} bad length(s)`);
    if (s.badHeader) parts.push(`${s.badHeader} bad header(s)`);
    if (s.rejected) parts.push(`${s.rejected} rejected frame(s)`);
    if (s.skipped) parts.push(`${s.skipped} byte(s) skipped`);
    return parts.length ? `${what}; since the last good frame: ${parts.join(', ')}` : what;
  }
}
