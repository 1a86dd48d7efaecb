import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import {
  CRC_LEN,
  FrameDecoder,
  crc32,
  encodeFrame,
  frameLength,
  type FrameContent,
  type SampleFormat,
} from '../drivers/serial/frame.js';
import { RecordingSink } from './support/frame-sink.js';

/**
 * Bit-by-bit CRC-32 written from the parameters in PROTOCOL.md (the C routine there), independent
 * of zlib.
 */
function crc32Bitwise(bytes: Uint8Array): number {
  let crc = 0xffffffff;
  for (const b of bytes) {
    crc ^= b;
    for (let k = 0; k < 8; k++) crc = (crc >>> 1) ^ (0xedb88320 & -(crc & 1));
  }
  return (crc ^ 0xffffffff) >>> 0;
}

const RATE = 25_600;
const SPC = 16;

/** A deterministic frame: counts follow a formula the tests can recompute. */
function content(
  seq: number,
  first: number,
  opts: {
    channels?: number;
    format?: SampleFormat;
    edges?: number[] | undefined;
    rate?: number;
    spc?: number;
  } = {},
): FrameContent {
  const channels = opts.channels ?? 3;
  const spc = opts.spc ?? SPC;
  const format = opts.format ?? 'int24';
  const samples = Array.from({ length: channels }, (_, c) =>
    Array.from({ length: spc }, (_, i) => countAt(c, first + i)),
  );
  return {
    sequence: seq,
    firstSample: first,
    sampleRateHz: opts.rate ?? RATE,
    format,
    scaleVPerCount: Array.from({ length: channels }, (_, c) => 2 ** -(16 + c)),
    offsetV: Array.from({ length: channels }, (_, c) => c * 0.25),
    samples,
    tachEdges: 'edges' in opts ? opts.edges : [],
  };
}

function countAt(c: number, i: number): number {
  return ((i * 7919 + c * 104729) % 60001) - 30000;
}

function voltsAt(c: number, i: number): number {
  return Math.fround(countAt(c, i) * 2 ** -(16 + c) + c * 0.25);
}

/** Frames seq 0.. with contiguous sample indices starting at `first`. */
function stream(n: number, first = 1000, opts: Parameters<typeof content>[2] = {}): Uint8Array[] {
  const spc = opts.spc ?? SPC;
  return Array.from({ length: n }, (_, k) => encodeFrame(content(k, first + k * spc, opts)));
}

function concat(parts: Uint8Array[]): Uint8Array {
  return Buffer.concat(parts.map((p) => Buffer.from(p.buffer, p.byteOffset, p.byteLength)));
}

/** Bytes with no sync word in them. */
function garbage(n: number, seed = 1): Uint8Array {
  const out = new Uint8Array(n);
  let x = seed;
  for (let i = 0; i < n; i++) {
    x = (x * 1103515245 + 12345) >>> 0;
    out[i] = (x >>> 16) & 0xff;
    if (out[i] === 0xa5) out[i] = 0x11;
  }
  return out;
}

function decodeAll(bytes: Uint8Array, opts: ConstructorParameters<typeof FrameDecoder>[1] = {}) {
  const sink = new RecordingSink();
  const dec = new FrameDecoder(sink, opts);
  dec.push(bytes);
  return { sink, dec };
}

describe('CRC-32', () => {
  it('gives the published check value 0xCBF43926 for ASCII "123456789"', () => {
    // Check value of CRC-32/ISO-HDLC in the "Catalogue of parametrised CRC algorithms" (G. Cook)
    // and in R. Williams, "A Painless Guide to CRC Error Detection Algorithms" (1993), section 17.
    const ascii = Buffer.from('123456789', 'ascii');
    expect(crc32(ascii)).toBe(0xcbf43926);
    expect(crc32Bitwise(ascii)).toBe(0xcbf43926);
  });

  it('agrees with the bit-by-bit routine of PROTOCOL.md on arbitrary frames', () => {
    for (const f of stream(5, 77, { edges: undefined })) {
      const body = f.subarray(0, f.length - CRC_LEN);
      const stored = Buffer.from(f).readUInt32LE(f.length - CRC_LEN);
      expect(stored).toBe(crc32Bitwise(body));
    }
  });
});

/** The example frame of PROTOCOL.md section 7 (as content). */
const EXAMPLE_FRAME: FrameContent = {
  sequence: 7,
  firstSample: 1000,
  sampleRateHz: 25600,
  format: 'int24',
  scaleVPerCount: [2 ** -20, 2 ** -18],
  offsetV: [0, 0.5],
  samples: [
    [1, -1, 8388607],
    [-8388608, 0, 4096],
  ],
  tachEdges: [1001.5],
};

describe('frame encoding', () => {
  it('matches the example frame printed in PROTOCOL.md byte for byte', () => {
    const doc = readFileSync(new URL('../drivers/serial/PROTOCOL.md', import.meta.url), 'utf8');
    const block = /<!-- example-frame -->\s*```\n([\s\S]*?)```/.exec(doc);
    expect(block).not.toBeNull();
    const docBytes = Buffer.from(block![1]!.replace(/\s+/g, ''), 'hex');
    const f = encodeFrame(EXAMPLE_FRAME);
    expect(Buffer.from(f).toString('hex')).toBe(docBytes.toString('hex'));
    // The CRC in the example is right by the independent routine.
    expect(docBytes.readUInt32LE(docBytes.length - 4)).toBe(
      crc32Bitwise(docBytes.subarray(0, docBytes.length - 4)),
    );
  });

  it('puts each field at the offset PROTOCOL.md gives', () => {
    const f = Buffer.from(
      encodeFrame(
        content(0xfffffffe, 2 ** 40 + 5, {
          channels: 2,
          format: 'int16',
          edges: [2 ** 40 + 5 + 3.75],
        }),
      ),
    );
    expect([...f.subarray(0, 4)]).toEqual([0xa5, 0x5a, 0x54, 0x57]);
    expect(f[4]).toBe(1); // version
    expect(f[5]).toBe(40); // header_len
    expect(f[6]).toBe(8); // channel_entry_len
    expect(f[7]).toBe(1); // int16
    expect(f.readUInt32LE(8)).toBe(f.length);
    expect(f.length).toBe(40 + 2 * 8 + 8 + SPC * 2 * 2 + 4);
    expect(f.readUInt32LE(12)).toBe(0xfffffffe);
    expect(f.readBigUInt64LE(16)).toBe(2n ** 40n + 5n);
    expect(f.readDoubleLE(24)).toBe(RATE);
    expect(f.readUInt16LE(32)).toBe(SPC);
    expect(f[34]).toBe(2);
    expect(f[35]).toBe(1); // tach_timed
    expect(f.readUInt16LE(36)).toBe(1);
    expect(f.readFloatLE(40)).toBe(2 ** -16); // channel 0 scale
    expect(f.readFloatLE(48 + 4)).toBe(0.25); // channel 1 offset
    expect(f.readUInt32LE(56)).toBe(3); // edge tick
    expect(f.readUInt32LE(60)).toBe(0.75 * 2 ** 32); // edge fraction
    expect(f.readInt16LE(64)).toBe(countAt(0, 2 ** 40 + 5)); // sample 0 channel 0
    expect(f.readInt16LE(66)).toBe(countAt(1, 2 ** 40 + 5)); // sample 0 channel 1 (interleaved)
  });
});

describe('frame decoding', () => {
  for (const format of ['int16', 'int24', 'float32'] as const) {
    it(`returns the exact volts of ${format} samples`, () => {
      const { sink, dec } = decodeAll(concat(stream(3, 500, { format })));
      expect(sink.frames).toHaveLength(3);
      expect(sink.gaps).toHaveLength(0);
      expect(dec.counters.frames_ok).toBe(3);
      const f = sink.frames[1]!;
      expect(f.startIndex).toBe(500 + SPC);
      for (let c = 0; c < 3; c++)
        for (let i = 0; i < SPC; i++) expect(f.channels[c]![i]).toBe(voltsAt(c, 500 + SPC + i));
    });
  }

  it('sign-extends int24 and int16 at the ends of their ranges', () => {
    const counts24 = [8388607, -8388608, -1, 0, 1];
    const counts16 = [32767, -32768, -1, 0, 1];
    for (const [format, counts] of [
      ['int24', counts24],
      ['int16', counts16],
    ] as const) {
      const { sink } = decodeAll(
        encodeFrame({
          sequence: 0,
          firstSample: 0,
          sampleRateHz: RATE,
          format,
          scaleVPerCount: [1],
          samples: [counts],
        }),
      );
      expect(sink.frames[0]!.channels[0]).toEqual(counts);
    }
  });

  it('returns tach edges with their fractional part; none-but-timed and not-timed stay distinct', () => {
    const edges = [1000 + 0.25, 1000 + 7 + 2 ** -20, 1000 + 15.999969482421875];
    const { sink } = decodeAll(
      concat([
        encodeFrame(content(0, 1000, { edges })),
        encodeFrame(content(1, 1016, { edges: [] })),
        encodeFrame(content(2, 1032, { edges: undefined })),
      ]),
    );
    expect(sink.frames[0]!.tachEdges).toEqual(edges);
    expect(sink.frames[1]!.tachEdges).toEqual([]);
    expect(sink.frames[2]!.tachEdges).toBeUndefined();
  });

  it('gives the same result wherever the byte stream is split into chunks', () => {
    const bytes = concat([
      encodeFrame(content(0, 0, { edges: [5.5] })),
      encodeFrame(content(1, SPC, { edges: [SPC + 2.25] })),
      encodeFrame(content(2, 2 * SPC, { edges: undefined })),
    ]);
    const whole = decodeAll(bytes).sink.items;
    expect(whole).toHaveLength(3);
    for (let k = 0; k <= bytes.length; k++) {
      const sink = new RecordingSink();
      const dec = new FrameDecoder(sink);
      dec.push(bytes.subarray(0, k));
      dec.push(bytes.subarray(k));
      expect(sink.items, `split at byte ${k}`).toEqual(whole);
      expect(dec.counters.bytes_skipped).toBe(0);
    }
    const sink = new RecordingSink();
    const dec = new FrameDecoder(sink);
    for (let i = 0; i < bytes.length; i++) dec.push(bytes.subarray(i, i + 1));
    expect(sink.items).toEqual(whole);
  });

  it('skips garbage between frames, counting every byte and one resync', () => {
    const frames = stream(4, 0);
    const junk = garbage(333);
    const bytes = concat([frames[0]!, frames[1]!, junk, frames[2]!, frames[3]!]);
    const { sink, dec } = decodeAll(bytes);
    expect(sink.frames.map((f) => f.sequence)).toEqual([0, 1, 2, 3]);
    expect(sink.gaps).toEqual([]);
    expect(dec.counters.resyncs).toBe(1);
    expect(dec.counters.bytes_skipped).toBe(333);
    // Nothing lost track of: every byte is in a good frame, skipped, or still buffered.
    const good = frames.reduce((s, f) => s + f.length, 0);
    expect(dec.counters.bytes_received).toBe(good + dec.counters.bytes_skipped + dec.bufferedBytes);
  });

  it('resynchronises after garbage inside a frame and reports the lost frame as a gap with exact bounds', () => {
    const frames = stream(4, 2000);
    const hit = frames[1]!;
    const damaged = concat([hit.subarray(0, 70), garbage(41, 7), hit.subarray(70)]);
    const { sink, dec } = decodeAll(concat([frames[0]!, damaged, frames[2]!, frames[3]!]));
    expect(sink.frames.map((f) => f.sequence)).toEqual([0, 2, 3]);
    expect(sink.gaps).toHaveLength(1);
    expect(sink.gaps[0]).toMatchObject({ fromIndex: 2000 + SPC, toIndex: 2000 + 2 * SPC });
    expect(sink.gaps[0]!.reason).toMatch(
      /sequence jump 0 -> 2 \(1 frame\(s\) missing\).*1 CRC error/,
    );
    expect(dec.counters.crc_errors).toBe(1);
    expect(dec.counters.samples_lost).toBe(SPC);
    expect(dec.counters.bytes_skipped).toBe(damaged.length);
    expect(dec.counters.gaps).toBe(1);
    // The frame after the damage is decoded exactly.
    expect(sink.frames[1]!.channels[2]![3]).toBe(voltsAt(2, 2000 + 2 * SPC + 3));
  });

  it('loses only the truncated frame when the next frame starts inside its claimed length', () => {
    const frames = stream(4, 0);
    const cut = frames[1]!.subarray(0, 60);
    const { sink, dec } = decodeAll(concat([frames[0]!, cut, frames[2]!, frames[3]!]));
    expect(sink.frames.map((f) => f.sequence)).toEqual([0, 2, 3]);
    expect(sink.gaps).toEqual([expect.objectContaining({ fromIndex: SPC, toIndex: 2 * SPC })]);
    expect(dec.counters.crc_errors).toBe(1);
    expect(dec.counters.bytes_skipped).toBe(60);
  });

  it('survives garbage that contains a false sync word', () => {
    const frames = stream(3, 0);
    const fake = concat([Uint8Array.of(0xa5, 0x5a, 0x54, 0x57, 9, 40, 8, 2), garbage(50, 3)]);
    const { sink, dec } = decodeAll(concat([frames[0]!, fake, frames[1]!, frames[2]!]));
    expect(sink.frames.map((f) => f.sequence)).toEqual([0, 1, 2]);
    expect(dec.counters.bad_headers).toBe(1);
    expect(dec.counters.bytes_skipped).toBe(fake.length);
  });

  it('counts a damaged CRC and reports exactly the samples of that frame as lost', () => {
    const frames = stream(5, 10_000);
    const bad = Uint8Array.from(frames[2]!);
    bad[bad.length - 10] ^= 0x01; // one bit in a sample
    const { sink, dec } = decodeAll(concat([frames[0]!, frames[1]!, bad, frames[3]!, frames[4]!]));
    expect(dec.counters.crc_errors).toBe(1);
    expect(sink.gaps).toEqual([
      expect.objectContaining({
        kind: 'gap',
        fromIndex: 10_000 + 2 * SPC,
        toIndex: 10_000 + 3 * SPC,
      }),
    ]);
    expect(sink.items.map((i) => (i.kind === 'gap' ? 'gap' : i.frame.sequence))).toEqual([
      0,
      1,
      'gap',
      3,
      4,
    ]);
  });

  it('counts a length field that contradicts the header as a bad length', () => {
    const frames = stream(3, 0);
    const bad = Buffer.from(frames[1]!);
    bad.writeUInt32LE(bad.readUInt32LE(8) + 3, 8);
    const { sink, dec } = decodeAll(concat([frames[0]!, bad, frames[2]!]));
    expect(dec.counters.bad_lengths).toBe(1);
    expect(dec.counters.crc_errors).toBe(0);
    expect(sink.gaps).toEqual([
      expect.objectContaining({
        fromIndex: SPC,
        toIndex: 2 * SPC,
        reason: expect.stringMatching(/1 bad length/),
      }),
    ]);
  });

  it('counts samples per channel above the limit as a bad length', () => {
    const big = encodeFrame(content(0, 0, { spc: 300 }));
    const { sink, dec } = decodeAll(big, { limits: { maxSamplesPerChannel: 256 } });
    expect(sink.frames).toHaveLength(0);
    expect(dec.counters.bad_lengths).toBe(1);
  });

  it('counts an unknown protocol version as a bad header and says which versions it reads', () => {
    const f = Buffer.from(encodeFrame(content(0, 0)));
    f[4] = 3;
    const { sink, dec } = decodeAll(f);
    expect(dec.counters.bad_headers).toBe(1);
    expect(sink.problems.find((p) => p.kind === 'bad_header')?.detail).toMatch(
      /protocol version 3 \(this agent reads versions 1 and 2\)/,
    );
  });

  it('counts a version 2 frame with a version 1 header length as a bad header, naming both', () => {
    const f = Buffer.from(encodeFrame(content(0, 0)));
    f[4] = 2;
    const { sink, dec } = decodeAll(f);
    expect(dec.counters.bad_headers).toBe(1);
    expect(sink.problems.find((p) => p.kind === 'bad_header')?.detail).toMatch(
      /header length 40 below 48 \(version 2\)/,
    );
  });

  it('rejects intact frames that do not match the configured channel count or sample rate', () => {
    const good = stream(2, 0);
    const wrongChannels = encodeFrame(content(2, 2 * SPC, { channels: 4 }));
    const wrongRate = encodeFrame(content(3, 3 * SPC, { rate: 51_200 }));
    const after = encodeFrame(content(4, 4 * SPC));
    const { sink, dec } = decodeAll(concat([...good, wrongChannels, wrongRate, after]), {
      expect: { channelCount: 3, sampleRateHz: RATE },
    });
    expect(dec.counters.rejected_frames).toBe(2);
    expect(sink.frames.map((f) => f.sequence)).toEqual([0, 1, 4]);
    expect(sink.gaps).toEqual([
      expect.objectContaining({
        fromIndex: 2 * SPC,
        toIndex: 4 * SPC,
        reason: expect.stringMatching(/2 rejected frame/),
      }),
    ]);
    expect(sink.problems.map((p) => p.detail).join('\n')).toMatch(
      /4 channel\(s\), the configuration says 3 \(acquisition.channels\)/,
    );
  });

  it('rejects non-finite float32 samples', () => {
    const c = content(0, 0, { format: 'float32' });
    (c.samples[1] as number[])[4] = Number.NaN;
    const { sink, dec } = decodeAll(encodeFrame(c));
    expect(sink.frames).toHaveLength(0);
    expect(dec.counters.bad_headers).toBe(1);
  });

  it('reports a dropped frame as a gap with exact bounds', () => {
    const frames = stream(6, 40);
    const { sink, dec } = decodeAll(concat([frames[0]!, frames[1]!, frames[4]!, frames[5]!]));
    expect(sink.gaps).toEqual([
      {
        kind: 'gap',
        fromIndex: 40 + 2 * SPC,
        toIndex: 40 + 4 * SPC,
        reason: 'sequence jump 1 -> 4 (2 frame(s) missing)',
      },
    ]);
    expect(dec.counters.samples_lost).toBe(2 * SPC);
  });

  it('treats the sequence wrapping from 2^32-1 to 0 as continuous', () => {
    const a = encodeFrame(content(0xffffffff, 0));
    const b = encodeFrame(content(0, SPC));
    const { sink, dec } = decodeAll(concat([a, b]));
    expect(sink.gaps).toEqual([]);
    expect(dec.counters.sequence_anomalies).toBe(0);
  });

  it('loses no samples when only the sequence jumps, but counts it', () => {
    const { sink, dec } = decodeAll(
      concat([encodeFrame(content(5, 0)), encodeFrame(content(9, SPC))]),
    );
    expect(sink.gaps).toEqual([]);
    expect(dec.counters.sequence_anomalies).toBe(1);
  });

  it('reports a board-side clock jump with a continuous sequence as a gap', () => {
    const { sink } = decodeAll(
      concat([encodeFrame(content(0, 0)), encodeFrame(content(1, SPC + 5))]),
    );
    expect(sink.gaps).toEqual([
      expect.objectContaining({
        fromIndex: SPC,
        toIndex: SPC + 5,
        reason: expect.stringMatching(/board-side overrun/),
      }),
    ]);
  });

  it('keeps the output clock increasing across a board restart, estimating the loss from the wall clock', () => {
    let now = 50_000;
    const sink = new RecordingSink();
    const dec = new FrameDecoder(sink, { nowMs: () => now });
    dec.push(encodeFrame(content(100, 80_000)));
    dec.push(encodeFrame(content(101, 80_000 + SPC)));
    now += 2000; // 2 s later the board, restarted, sends from 0
    dec.linkDown('test: device disconnected');
    dec.push(encodeFrame(content(0, 0)));
    dec.push(encodeFrame(content(1, SPC)));
    const gap = sink.gaps[0]!;
    expect(gap.fromIndex).toBe(80_000 + 2 * SPC);
    expect(gap.toIndex - gap.fromIndex).toBe(2 * RATE - SPC);
    expect(gap.reason).toMatch(
      /^board sample clock restarted .*; since the last good frame: test: device disconnected$/,
    );
    const after = sink.frames.slice(2);
    expect(after[0]!.startIndex).toBe(gap.toIndex);
    expect(after[1]!.startIndex).toBe(gap.toIndex + SPC);
    expect(after[0]!.boardFirstSample).toBe(0);
    expect(dec.counters.clock_restarts).toBe(1);
  });

  it('reads frames with a longer header and channel entries (additions within version 1)', () => {
    const v1 = Buffer.from(encodeFrame(content(0, 0, { channels: 2, edges: [3.5] })));
    // Lay out a v1.x frame: 4 extra header bytes, 4 extra bytes per channel entry.
    const header = Buffer.concat([v1.subarray(0, 40), Buffer.from([1, 2, 3, 4])]);
    const entries = Buffer.concat([
      v1.subarray(40, 48),
      Buffer.from([9, 9, 9, 9]),
      v1.subarray(48, 56),
      Buffer.from([8, 8, 8, 8]),
    ]);
    const rest = v1.subarray(56, v1.length - 4);
    const body = Buffer.concat([header, entries, rest]);
    body[5] = 44;
    body[6] = 12;
    body.writeUInt32LE(body.length + 4, 8);
    const crc = Buffer.alloc(4);
    crc.writeUInt32LE(crc32Bitwise(body));
    const { sink, dec } = decodeAll(Buffer.concat([body, crc]));
    expect(dec.counters.frames_ok).toBe(1);
    expect(sink.frames[0]!.channels[1]![7]).toBe(voltsAt(1, 7));
    expect(sink.frames[0]!.tachEdges).toEqual([3.5]);
  });

  it('drops the partial frame held when the link goes down, and names the cause in the next gap', () => {
    const frames = stream(4, 0);
    const sink = new RecordingSink();
    const dec = new FrameDecoder(sink);
    dec.push(frames[0]!);
    dec.push(frames[1]!.subarray(0, 50));
    expect(dec.bufferedBytes).toBe(50);
    dec.linkDown('/dev/x: device disconnected');
    expect(dec.bufferedBytes).toBe(0);
    expect(dec.counters.bytes_skipped).toBe(50);
    dec.push(frames[3]!);
    expect(sink.gaps).toEqual([
      expect.objectContaining({
        fromIndex: SPC,
        toIndex: 3 * SPC,
        reason: expect.stringMatching(/^sequence jump 0 -> 3 .*\/dev\/x: device disconnected/),
      }),
    ]);
  });

  it('handles chunks far larger than its buffer', () => {
    const frames = stream(400, 0, { spc: 64 });
    const bytes = concat(frames);
    const { sink, dec } = decodeAll(bytes, { limits: { maxFrameBytes: 2048 } });
    expect(bytes.length).toBeGreaterThan(3 * 65_536);
    expect(dec.counters.frames_ok).toBe(400);
    expect(sink.gaps).toEqual([]);
    expect(frameLength(3, 64, 'int24', 0)).toBe(frames[0]!.length);
  });
});

describe('protocol version 2: the board declares its timing', () => {
  const timing = { sampleDelayTicks: 38.5, tachDelayTicks: 2.25, skewTicks: [0, 0.25, 0.5] };
  const v2 = (
    seq: number,
    first: number,
    t: FrameContent['timing'] = timing,
    edges: number[] = [first + 5.5],
  ) => encodeFrame({ ...content(seq, first, { edges }), timing: t });

  it('matches the version 2 example frame printed in PROTOCOL.md byte for byte, fields at the offsets given there', () => {
    const doc = readFileSync(new URL('../drivers/serial/PROTOCOL.md', import.meta.url), 'utf8');
    const block = /<!-- example-frame-v2 -->\s*```\n([\s\S]*?)```/.exec(doc);
    expect(block).not.toBeNull();
    const docBytes = Buffer.from(block![1]!.replace(/\s+/g, ''), 'hex');
    const f = encodeFrame({
      ...EXAMPLE_FRAME,
      timing: { sampleDelayTicks: 38.5, tachDelayTicks: 2, skewTicks: [0, 0.5] },
    });
    expect(Buffer.from(f).toString('hex')).toBe(docBytes.toString('hex'));
    // Read back field by field at the documented offsets (Node's Buffer readers, not the decoder).
    expect(docBytes[4]).toBe(2);
    expect(docBytes[5]).toBe(48);
    expect(docBytes[6]).toBe(12);
    expect(docBytes.readFloatLE(40)).toBe(38.5);
    expect(docBytes.readFloatLE(44)).toBe(2);
    expect(docBytes.readFloatLE(48 + 8)).toBe(0); // channel 0 skew
    expect(docBytes.readFloatLE(48 + 12 + 8)).toBe(0.5); // channel 1 skew
    expect(docBytes.length).toBe(48 + 2 * 12 + 8 + 3 * 2 * 3 + 4);
    expect(docBytes.readUInt32LE(docBytes.length - 4)).toBe(
      crc32Bitwise(docBytes.subarray(0, docBytes.length - 4)),
    );
  });

  it('gives each channel its delay (ADC delay less skew) and the tach edges as true instants (tach delay removed)', () => {
    const { sink, dec } = decodeAll(concat([v2(0, 1000), v2(1, 1000 + SPC)]));
    const frames = sink.items.filter((i) => i.kind === 'frame').map((i) => i.frame);
    expect(frames).toHaveLength(2);
    expect(frames[0]!.channelDelays).toEqual([38.5, 38.25, 38]);
    expect(frames[0]!.tachEdges).toEqual([1000 + 5.5 - 2.25]);
    // Samples decode exactly as in version 1.
    expect(frames[1]!.channels[2]![3]).toBe(voltsAt(2, 1000 + SPC + 3));
    expect(dec.timing).toMatchObject({
      protocolVersion: 2,
      declared: true,
      sampleDelayTicks: 38.5,
      tachDelayTicks: 2.25,
      maxSkewTicks: 0.5,
    });
    expect(dec.counters.timing_faults).toBe(0);
  });

  it('version 1 frames carry no delays: channels taken as simultaneous and undelayed', () => {
    const { sink, dec } = decodeAll(concat(stream(2)));
    const frames = sink.items.filter((i) => i.kind === 'frame').map((i) => i.frame);
    expect(frames.every((f) => f.channelDelays === undefined)).toBe(true);
    expect(dec.timing).toMatchObject({ protocolVersion: 1, declared: false });
  });

  const impossible: [string, FrameContent['timing'], RegExp][] = [
    [
      'a negative ADC delay',
      { ...timing, sampleDelayTicks: -3 },
      /sample_delay_ticks -3 outside 0\.\.1024/,
    ],
    [
      'an ADC delay that is not a number',
      { ...timing, sampleDelayTicks: NaN },
      /sample_delay_ticks NaN/,
    ],
    [
      'an ADC delay of 5000 ticks',
      { ...timing, sampleDelayTicks: 5000 },
      /sample_delay_ticks 5000 outside/,
    ],
    [
      'a negative tach delay',
      { ...timing, tachDelayTicks: -0.5 },
      /tach_delay_ticks -0\.5 outside/,
    ],
    [
      'a skew of a whole sample period',
      { ...timing, skewTicks: [0, 1, 0.5] },
      /channel 1 skew_ticks 1 outside 0 to below 1/,
    ],
    [
      'a negative skew',
      { ...timing, skewTicks: [0, 0.25, -0.125] },
      /channel 2 skew_ticks -0\.125/,
    ],
  ];
  for (const [what, bad, msg] of impossible) {
    it(`${what}: counted, one clear message, samples kept with the last good declaration`, () => {
      const { sink, dec } = decodeAll(
        concat([v2(0, 1000), v2(1, 1000 + SPC, bad), v2(2, 1000 + 2 * SPC, bad)]),
      );
      const frames = sink.items.filter((i) => i.kind === 'frame').map((i) => i.frame);
      expect(frames).toHaveLength(3); // monitoring goes on
      expect(dec.counters.timing_faults).toBe(2);
      expect(frames[2]!.channelDelays).toEqual([38.5, 38.25, 38]);
      const p = sink.problems.filter((x) => x.kind === 'timing');
      expect(p).toHaveLength(2); // one per frame here; SerialSource logs them once per burst
      expect(p[0]!.detail).toMatch(msg);
      expect(p[0]!.detail).toMatch(
        /frame 1: impossible timing declaration .* used with the last good declaration \(sample delay 38\.5 ticks, tach delay 2\.25 ticks\).*PROTOCOL\.md 2\.6/,
      );
    });
  }

  it('an impossible declaration before any good one: samples used without compensation, and it says so', () => {
    const { sink, dec } = decodeAll(v2(0, 1000, { ...timing, sampleDelayTicks: -1 }));
    expect(sink.items.filter((i) => i.kind === 'frame')).toHaveLength(1);
    expect(dec.counters.timing_faults).toBe(1);
    expect(sink.problems.find((x) => x.kind === 'timing')!.detail).toMatch(
      /none yet: no delay compensation/,
    );
  });

  it('rejects a declared sample rate beyond the tolerance, naming it and the key; accepts one within', () => {
    const within = decodeAll(encodeFrame(content(0, 0, { rate: RATE * (1 + 80e-6) })), {
      expect: { sampleRateHz: RATE, sampleRateTolerancePpm: 100 },
    });
    expect(within.dec.counters.frames_ok).toBe(1);
    const beyond = decodeAll(encodeFrame(content(0, 0, { rate: RATE * (1 + 150e-6) })), {
      expect: { sampleRateHz: RATE, sampleRateTolerancePpm: 100 },
    });
    expect(beyond.dec.counters.frames_ok).toBe(0);
    expect(beyond.dec.counters.rejected_frames).toBe(1);
    expect(beyond.sink.problems.find((p) => p.kind === 'rejected')!.detail).toMatch(
      /\+150 ppm from the configured 25600 Hz, beyond the tolerance of 100 ppm: .*acquisition\.sample_rate_tolerance_ppm/,
    );
  });
});
