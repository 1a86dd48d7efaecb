import { execFileSync } from 'node:child_process';
import { mkdtempSync, readFileSync, statSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { UserError } from '../agent/errors.js';
import { maxWavFrames, WavWriter } from '../drivers/wav/writer.js';

/** Minimal RIFF walk written here, independent of the writer: chunk ids, sizes and offsets. */
function chunks(buf: Buffer): { id: string; size: number; at: number }[] {
  expect(buf.toString('latin1', 0, 4)).toBe('RIFF');
  expect(buf.toString('latin1', 8, 12)).toBe('WAVE');
  expect(buf.readUInt32LE(4)).toBe(buf.length - 8);
  const out: { id: string; size: number; at: number }[] = [];
  let o = 12;
  while (o + 8 <= buf.length) {
    const size = buf.readUInt32LE(o + 4);
    out.push({ id: buf.toString('latin1', o, o + 4), size, at: o + 8 });
    o += 8 + size + (size & 1);
  }
  expect(o).toBe(buf.length);
  return out;
}

/**
 * Test signal: channel c, frame i. Distinct per channel and frame, exact in float32 where it
 * matters.
 */
const value = (c: number, i: number) =>
  Math.fround((c + 1) * 0.5 + Math.sin(0.001 * i * (c + 1)) * 3 - (i % 7) * 1e-3);

async function writeFile(
  path: string,
  channels: number,
  frames: number,
  block: number,
): Promise<number> {
  const w = await WavWriter.create(path, {
    sampleRate: 25600,
    channelCount: channels,
    comment: 'test: 0=DE-V 1=DE-H',
  });
  const bufs = Array.from({ length: channels }, () => new Float32Array(block));
  for (let start = 0; start < frames; start += block) {
    const n = Math.min(block, frames - start);
    for (let c = 0; c < channels; c++)
      for (let i = 0; i < n; i++) bufs[c]![i] = value(c, start + i);
    await w.write(bufs, n);
  }
  return w.close();
}

describe('WAV writer (RIFF/WAVE IEEE float32)', () => {
  const dir = mkdtempSync(join(tmpdir(), 'tw-wav-'));

  it('writes a header a plain RIFF parse reads back: format 3, 7 channels, 25.6 kHz, 32 bits, fact and data sizes', async () => {
    const f = join(dir, 'a.wav');
    const frames = 10_000;
    const bytes = await writeFile(f, 7, frames, 4096);
    const buf = readFileSync(f);
    expect(buf.length).toBe(bytes);
    const cs = chunks(buf);
    expect(cs.map((c) => c.id)).toEqual(['fmt ', 'fact', 'LIST', 'data']);
    const fmt = cs[0]!;
    expect(fmt.size).toBe(18);
    expect(buf.readUInt16LE(fmt.at)).toBe(3); // WAVE_FORMAT_IEEE_FLOAT
    expect(buf.readUInt16LE(fmt.at + 2)).toBe(7);
    expect(buf.readUInt32LE(fmt.at + 4)).toBe(25600);
    expect(buf.readUInt32LE(fmt.at + 8)).toBe(25600 * 7 * 4);
    expect(buf.readUInt16LE(fmt.at + 12)).toBe(28);
    expect(buf.readUInt16LE(fmt.at + 14)).toBe(32);
    expect(buf.readUInt32LE(cs[1]!.at)).toBe(frames);
    expect(buf.toString('latin1', cs[2]!.at, cs[2]!.at + cs[2]!.size)).toContain(
      'test: 0=DE-V 1=DE-H',
    );
    const data = cs[3]!;
    expect(data.size).toBe(frames * 7 * 4);
    for (const [c, i] of [
      [0, 0],
      [6, 0],
      [3, 4095],
      [3, 4096],
      [6, 9999],
    ] as const) {
      expect(buf.readFloatLE(data.at + (i * 7 + c) * 4)).toBe(value(c, i));
    }
  });

  it('is read back exactly by scipy.io.wavfile (reference library)', async () => {
    const f = join(dir, 'b.wav');
    const frames = 30_001;
    await writeFile(f, 7, frames, 1000);
    const py = [
      'import sys, json, numpy as np',
      'from scipy.io import wavfile',
      'fs, d = wavfile.read(sys.argv[1])',
      'print(json.dumps({"fs": fs, "shape": list(d.shape), "dtype": str(d.dtype), ' +
        '"sum": [float(np.sum(d[:, c].astype(np.float64))) for c in range(d.shape[1])], ' +
        '"first": [float(x) for x in d[0]], "last": [float(x) for x in d[-1]]}))',
    ].join('\n');
    const out = JSON.parse(
      execFileSync(process.env.TURNWISE_PYTHON ?? 'python3', ['-c', py, f], { encoding: 'utf8' }),
    ) as {
      fs: number;
      shape: number[];
      dtype: string;
      sum: number[];
      first: number[];
      last: number[];
    };
    expect(out.fs).toBe(25600);
    expect(out.shape).toEqual([frames, 7]);
    expect(out.dtype).toBe('float32');
    for (let c = 0; c < 7; c++) {
      expect(out.first[c]).toBe(value(c, 0));
      expect(out.last[c]).toBe(value(c, frames - 1));
      let s = 0;
      for (let i = 0; i < frames; i++) s += value(c, i);
      expect(out.sum[c]).toBeCloseTo(s, 6);
    }
  });

  it('keeps a valid file when no frame was written', async () => {
    const f = join(dir, 'empty.wav');
    const w = await WavWriter.create(f, { sampleRate: 1000, channelCount: 2 });
    await w.close();
    const cs = chunks(readFileSync(f));
    expect(cs.at(-1)).toMatchObject({ id: 'data', size: 0 });
  });

  it('refuses to pass the 4 GiB RIFF limit and to create a file in a missing folder', async () => {
    expect(maxWavFrames(7)).toBe(Math.floor((0xffffffff - 512) / 28));
    await expect(
      WavWriter.create(join(dir, 'no/such/dir/x.wav'), { sampleRate: 1000, channelCount: 1 }),
    ).rejects.toThrow(UserError);
    const f = join(dir, 'big.wav');
    const w = await WavWriter.create(f, { sampleRate: 1000, channelCount: 1000 });
    const n = Math.floor(0xffffffff / (4 * 1000)) + 1;
    const bufs = Array.from({ length: 1000 }, () => new Float32Array(0));
    await expect(w.write(bufs, n)).rejects.toThrow(/4 GiB limit/);
    await w.close();
    expect(statSync(f).size).toBeLessThan(1024);
  });
});
