import { closeSync, openSync, writeSync } from 'node:fs';

/** Minimal float32 WAV writer for tests (channels interleaved, volts). */
export function writeFloatWav(
  file: string,
  sampleRate: number,
  channels: readonly Float32Array[],
): void {
  const nch = channels.length;
  const n = channels[0]!.length;
  const dataBytes = n * nch * 4;
  const h = Buffer.alloc(44);
  h.write('RIFF', 0, 'ascii');
  h.writeUInt32LE(36 + dataBytes, 4);
  h.write('WAVE', 8, 'ascii');
  h.write('fmt ', 12, 'ascii');
  h.writeUInt32LE(16, 16);
  h.writeUInt16LE(3, 20);
  h.writeUInt16LE(nch, 22);
  h.writeUInt32LE(sampleRate, 24);
  h.writeUInt32LE(sampleRate * nch * 4, 28);
  h.writeUInt16LE(nch * 4, 32);
  h.writeUInt16LE(32, 34);
  h.write('data', 36, 'ascii');
  h.writeUInt32LE(dataBytes, 40);
  const fd = openSync(file, 'w');
  try {
    writeSync(fd, h);
    const chunk = 8192;
    const buf = Buffer.alloc(chunk * nch * 4);
    for (let i = 0; i < n; i += chunk) {
      const m = Math.min(chunk, n - i);
      for (let j = 0; j < m; j++)
        for (let c = 0; c < nch; c++) buf.writeFloatLE(channels[c]![i + j]!, (j * nch + c) * 4);
      writeSync(fd, buf, 0, m * nch * 4);
    }
  } finally {
    closeSync(fd);
  }
}
