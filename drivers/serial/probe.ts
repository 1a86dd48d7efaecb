/**
 * Listens to a serial device for a while and reports what the board sends: its format, the sample
 * rate it claims and the one the wall clock measures, and every error counter. For commissioning
 * and for firmware authors; the agent itself uses SerialSource.
 */
import { UserError } from '../../agent/errors.js';
import { FrameDecoder, type DecodeProblem, type DecoderCounters, type SampleFormat } from './frame.js';
import { describeOpenFailure } from './ports.js';

export interface ProbeReport {
  readonly device: string;
  readonly listened_s: number;
  readonly counters: DecoderCounters;
  /** Format of the first good frame; null when none arrived. */
  readonly format: {
    readonly channels: number;
    readonly sample_rate_hz: number;
    readonly sample_format: SampleFormat;
    readonly samples_per_frame: number;
    readonly tach_timed: boolean;
  } | null;
  /** Samples per channel per second of wall time between the first and the last good frame. */
  readonly measured_rate_hz: number | null;
  readonly tach_edges: number;
  /** First few problems, in order, for the firmware author. */
  readonly problems: readonly string[];
}

export async function probeSerial(device: string, baud: number, seconds: number, onProgress?: (msg: string) => void): Promise<ProbeReport> {
  let SerialPort: typeof import('serialport').SerialPort;
  try {
    ({ SerialPort } = await import('serialport'));
  } catch (e) {
    throw new UserError(device, `the serialport native module could not be loaded (${(e as Error).message})`, 'run `npm rebuild @serialport/bindings-cpp` (needs build tools)');
  }
  const port = new SerialPort({ path: device, baudRate: baud, autoOpen: false });
  port.on('error', () => {});
  await new Promise<void>((resolve, reject) =>
    port.open((err) => {
      if (!err) return resolve();
      const f = describeOpenFailure(device, err);
      reject(new UserError('serial port', f.detail, f.hint));
    }),
  );

  let format: ProbeReport['format'] = null;
  let firstMs = 0;
  let lastMs = 0;
  let firstSamples = 0;
  let samples = 0;
  let edges = 0;
  const problems: string[] = [];
  const decoder = new FrameDecoder({
    frame: (f) => {
      const now = performance.now();
      if (!format) {
        format = { channels: f.channels.length, sample_rate_hz: f.sampleRateHz, sample_format: f.format, samples_per_frame: f.samplesPerChannel, tach_timed: f.tachEdges !== undefined };
        firstMs = now;
        firstSamples = f.samplesPerChannel;
      }
      lastMs = now;
      samples += f.samplesPerChannel;
      edges += f.tachEdges?.length ?? 0;
    },
    gap: () => {},
    problem: (kind: DecodeProblem, detail: string) => {
      if (problems.length < 20) problems.push(`${kind}: ${detail}`);
    },
  });
  let disconnected: string | null = null;
  port.on('data', (chunk: Buffer) => decoder.push(chunk));
  port.once('close', (err: Error | null) => {
    disconnected = err ? err.message : 'closed';
  });

  const t0 = performance.now();
  const tick = setInterval(() => onProgress?.(`${((performance.now() - t0) / 1000).toFixed(0)} s: ${decoder.counters.frames_ok} frames, ${decoder.counters.bytes_received} bytes`), 1000);
  await new Promise<void>((resolve) => {
    const done = setTimeout(resolve, seconds * 1000);
    port.once('close', () => {
      clearTimeout(done);
      resolve();
    });
  });
  clearInterval(tick);
  const listened = (performance.now() - t0) / 1000;
  if (port.isOpen) await new Promise<void>((resolve) => port.close(() => resolve()));
  if (disconnected && disconnected !== 'closed') problems.push(`link: device went away after ${listened.toFixed(1)} s (${disconnected})`);

  // Rate from the samples after the first frame over the time they took to arrive.
  const spanS = (lastMs - firstMs) / 1000;
  const measured = format && spanS > 0.5 ? (samples - firstSamples) / spanS : null;
  return { device, listened_s: listened, counters: { ...decoder.counters }, format, measured_rate_hz: measured, tach_edges: edges, problems };
}
