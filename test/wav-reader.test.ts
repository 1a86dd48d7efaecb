import { describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { WavSource } from '../drivers/wav/reader.js';
import { UserError } from '../agent/errors.js';

/**
 * The reader is checked against files written by Python's standard library `wave` module (a
 * general-purpose reference implementation of RIFF/WAVE PCM) and, for float and
 * WAVE_FORMAT_EXTENSIBLE headers that `wave` does not write, by `struct` following the
 * Microsoft RIFF/WAVE and WAVEFORMATEXTENSIBLE layouts.
 */
const dir = mkdtempSync(join(tmpdir(), 'tw-wav-'));

function py(script: string): void {
  execFileSync('python3', ['-c', script], { cwd: dir, stdio: ['ignore', 'pipe', 'pipe'] });
}

async function readAll(
  file: string,
  opts = {},
): Promise<{
  info: { sampleRate: number; channelCount: number };
  data: number[][];
  blocks: number;
}> {
  const src = new WavSource(file, opts);
  const info = await src.open();
  const data: number[][] = Array.from({ length: info.channelCount }, () => []);
  let blocks = 0;
  let expectStart = 0;
  for await (const it of src.items()) {
    if (it.kind !== 'samples') continue;
    expect(it.startIndex).toBe(expectStart);
    expectStart += it.channels[0]!.length;
    blocks++;
    it.channels.forEach((c, i) => data[i]!.push(...c));
  }
  await src.close();
  return { info, data, blocks };
}

// 3 channels, 1000 frames: channel c, frame i holds integer ((i * 37 + c * 1000) % 2^15) - 2^14,
// scaled per width.
const PY_PCM = (bits: number, name: string) => `
import wave, struct
n, nch, w = 1000, 3, ${bits / 8}
f = wave.open('${name}', 'wb'); f.setnchannels(nch); f.setsampwidth(w); f.setframerate(25600)
frames = bytearray()
for i in range(n):
    for c in range(nch):
        v = ((i * 37 + c * 1000) % 32768) - 16384
        v <<= (${bits} - 16)
        frames += v.to_bytes(w, 'little', signed=True)
f.writeframes(bytes(frames)); f.close()
`;
const expectedInt = (i: number, c: number) => ((i * 37 + c * 1000) % 32768) - 16384;

describe('WAV reader', () => {
  for (const bits of [16, 24, 32]) {
    it(`reads ${bits}-bit PCM written by Python's wave module, scaled to volts`, async () => {
      const f = join(dir, `pcm${bits}.wav`);
      py(PY_PCM(bits, f));
      const { info, data, blocks } = await readAll(f, { blockFrames: 300, pcmFullScaleV: 10 });
      expect(info).toMatchObject({ sampleRate: 25600, channelCount: 3 });
      expect(blocks).toBe(4);
      for (const i of [0, 1, 299, 300, 777, 999]) {
        for (let c = 0; c < 3; c++)
          expect(data[c]![i]).toBeCloseTo((expectedInt(i, c) / 32768) * 10, 5);
      }
    });
  }

  it('reads IEEE float 32 inside WAVE_FORMAT_EXTENSIBLE, with an extra chunk before data', async () => {
    const f = join(dir, 'ext.wav');
    py(`
import struct
n, nch, fs = 500, 2, 51200
data = b''.join(struct.pack('<2f', 0.001 * i, -2.5 + 0.01 * i) for i in range(n))
guid_float = struct.pack('<IHH8s', 3, 0x0000, 0x0010, bytes([0x80,0x00,0x00,0xAA,0x00,0x38,0x9B,0x71]))
fmt = struct.pack('<HHIIHHHHI', 0xFFFE, nch, fs, fs*nch*4, nch*4, 32, 22, 32, 0x3) + guid_float
body = b'WAVE' + b'fmt ' + struct.pack('<I', len(fmt)) + fmt + b'LIST' + struct.pack('<I', 5) + b'abcde' + b'\\0' + b'data' + struct.pack('<I', len(data)) + data
open('${f}', 'wb').write(b'RIFF' + struct.pack('<I', len(body)) + body)
`);
    const { info, data } = await readAll(f, { blockFrames: 128 });
    expect(info).toMatchObject({ sampleRate: 51200, channelCount: 2 });
    expect(data[0]!.length).toBe(500);
    expect(data[0]![123]).toBeCloseTo(0.123, 6);
    expect(data[1]![499]).toBeCloseTo(-2.5 + 4.99, 5);
  });

  it('refuses a truncated file, naming the file and how much is missing', async () => {
    const f = join(dir, 'pcm16.wav');
    const whole = readFileSync(f);
    const cut = join(dir, 'cut.wav');
    writeFileSync(cut, whole.subarray(0, whole.length - 600));
    const src = new WavSource(cut);
    await expect(src.open()).rejects.toThrow(
      /cut\.wav: truncated: the data chunk declares 6000 bytes but only 5400 are in the file/,
    );
  });

  it('refuses unsupported formats and non-WAV files with a clear message', async () => {
    const f8 = join(dir, 'pcm8.wav');
    py(`
import wave
f = wave.open('${f8}', 'wb'); f.setnchannels(1); f.setsampwidth(1); f.setframerate(8000); f.writeframes(bytes(100)); f.close()
`);
    await expect(new WavSource(f8).open()).rejects.toThrow(
      /unsupported sample format: PCM, 8 bits/,
    );
    const txt = join(dir, 'notes.wav');
    writeFileSync(txt, 'these are not samples, just a text file');
    await expect(new WavSource(txt).open()).rejects.toThrow(/notes\.wav: not a RIFF\/WAVE file/);
    await expect(new WavSource(join(dir, 'missing.wav')).open()).rejects.toBeInstanceOf(UserError);
  });
});
