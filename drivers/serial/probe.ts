/**
 * Listens to a serial device for a while and reports what the board sends: its format, the sample
 * rate it claims and the one the wall clock measures, and every error counter. For commissioning
 * and for firmware authors; the agent itself uses SerialSource.
 */
import { UserError } from '../../agent/errors.js';
import {
  FrameDecoder,
  type DecodeProblem,
  type DecoderCounters,
  type SampleFormat,
} from './frame.js';
import { describeOpenFailure } from './ports.js';

export interface ProbeFormat {
  readonly protocol_version: number;
  readonly channels: number;
  readonly sample_rate_hz: number;
  readonly sample_format: SampleFormat;
  readonly samples_per_frame: number;
  readonly tach_timed: boolean;
  /**
   * Version 2 frames: the declared ADC delay, tach delay and largest channel skew, ticks; null for
   * version 1.
   */
  readonly sample_delay_ticks: number | null;
  readonly tach_delay_ticks: number | null;
  readonly max_skew_ticks: number | null;
}

/** One distinct format seen, with how many good frames had it and the sequence of the first. */
export interface ProbeFormatSeen extends ProbeFormat {
  readonly frames: number;
  readonly first_sequence: number;
}

export interface ProbeGap {
  readonly from_index: number;
  readonly to_index: number;
  readonly samples: number;
  readonly reason: string;
}

export interface ProbeReport {
  readonly device: string;
  readonly listened_s: number;
  readonly counters: DecoderCounters;
  /** Format of the first good frame; null when none arrived. */
  readonly format: ProbeFormat | null;
  /**
   * Every distinct format and frame size seen, in the order first seen (a firmware that changes
   * them shows each).
   */
  readonly formats_seen: readonly ProbeFormatSeen[];
  /** Every gap with its bounds (decoder sample clock), the first 100. */
  readonly gap_list: readonly ProbeGap[];
  /** Samples per channel per second of wall time between the first and the last good frame. */
  readonly measured_rate_hz: number | null;
  readonly tach_edges: number;
  /** First few problems, in order, for the firmware author. */
  readonly problems: readonly string[];
  /** DTR and RTS after opening: "asserted", or why not (a pseudo-terminal has no modem lines). */
  readonly modem_lines: string;
}

export async function probeSerial(
  device: string,
  baud: number,
  seconds: number,
  onProgress?: (msg: string) => void,
  limits?: { maxSamplesPerChannel?: number; maxFrameBytes?: number },
): Promise<ProbeReport> {
  let SerialPort: typeof import('serialport').SerialPort;
  try {
    ({ SerialPort } = await import('serialport'));
  } catch (e) {
    throw new UserError(
      device,
      `the serialport native module could not be loaded (${(e as Error).message})`,
      'run `npm rebuild @serialport/bindings-cpp` (needs build tools)',
    );
  }
  // The agent's UART settings (8N1, no flow control); DTR and RTS asserted after opening, as the
  // agent does.
  const port = new SerialPort({
    path: device,
    baudRate: baud,
    dataBits: 8,
    parity: 'none',
    stopBits: 1,
    rtscts: false,
    hupcl: true,
    autoOpen: false,
  });
  port.on('error', () => {});
  await new Promise<void>((resolve, reject) =>
    port.open((err) => {
      if (!err) return resolve();
      const f = describeOpenFailure(device, err);
      reject(new UserError('serial port', f.detail, f.hint));
    }),
  );

  let format: ProbeFormat | null = null;
  const seen = new Map<string, { f: ProbeFormat; frames: number; first: number }>();
  const gapList: ProbeGap[] = [];
  let firstMs = 0;
  let lastMs = 0;
  let firstSamples = 0;
  let samples = 0;
  let edges = 0;
  const problems: string[] = [];
  const decoder = new FrameDecoder(
    {
      frame: (f) => {
        const now = performance.now();
        const t = decoder.timing;
        const v2 = t.protocolVersion === 2 && t.declared;
        const cur: ProbeFormat = {
          protocol_version: t.protocolVersion,
          channels: f.channels.length,
          sample_rate_hz: f.sampleRateHz,
          sample_format: f.format,
          samples_per_frame: f.samplesPerChannel,
          tach_timed: f.tachEdges !== undefined,
          sample_delay_ticks: v2 ? t.sampleDelayTicks : null,
          tach_delay_ticks: v2 ? t.tachDelayTicks : null,
          max_skew_ticks: v2 ? t.maxSkewTicks : null,
        };
        const key = JSON.stringify(cur);
        const s = seen.get(key);
        if (s) s.frames++;
        else if (seen.size < 64) seen.set(key, { f: cur, frames: 1, first: f.sequence });
        if (!format) {
          format = cur;
          firstMs = now;
          firstSamples = f.samplesPerChannel;
        }
        lastMs = now;
        samples += f.samplesPerChannel;
        edges += f.tachEdges?.length ?? 0;
      },
      gap: (g) => {
        if (gapList.length < 100)
          gapList.push({
            from_index: g.fromIndex,
            to_index: g.toIndex,
            samples: g.toIndex - g.fromIndex,
            reason: g.reason,
          });
      },
      problem: (kind: DecodeProblem, detail: string) => {
        if (problems.length < 20) problems.push(`${kind}: ${detail}`);
      },
    },
    {
      limits: {
        ...(limits?.maxSamplesPerChannel !== undefined
          ? { maxSamplesPerChannel: limits.maxSamplesPerChannel }
          : {}),
        ...(limits?.maxFrameBytes !== undefined ? { maxFrameBytes: limits.maxFrameBytes } : {}),
      },
    },
  );
  let modemLines = 'asserted';
  await new Promise<void>((resolve) =>
    port.set({ dtr: true, rts: true }, (err) => {
      if (err) modemLines = `not supported by the device (${err.message})`;
      resolve();
    }),
  );
  let disconnected: string | null = null;
  port.on('data', (chunk: Buffer) => decoder.push(chunk));
  port.once('close', (err: Error | null) => {
    disconnected = err ? err.message : 'closed';
  });

  const t0 = performance.now();
  const tick = setInterval(
    () =>
      onProgress?.(
        `${((performance.now() - t0) / 1000).toFixed(0)} s: ` +
          `${decoder.counters.frames_ok} frames, ${decoder.counters.bytes_received} bytes`,
      ),
    1000,
  );
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
  if (disconnected && disconnected !== 'closed')
    problems.push(`link: device went away after ${listened.toFixed(1)} s (${disconnected})`);

  // Rate from the samples after the first frame over the time they took to arrive.
  const spanS = (lastMs - firstMs) / 1000;
  const measured = format && spanS > 0.5 ? (samples - firstSamples) / spanS : null;
  const formatsSeen = [...seen.values()].map((s) => ({
    ...s.f,
    frames: s.frames,
    first_sequence: s.first,
  }));
  return {
    device,
    listened_s: listened,
    counters: { ...decoder.counters },
    format,
    formats_seen: formatsSeen,
    gap_list: gapList,
    measured_rate_hz: measured,
    tach_edges: edges,
    problems,
    modem_lines: modemLines,
  };
}
