/**
 * The acquisition board on a serial port (USB CDC or UART), speaking the frame protocol of
 * PROTOCOL.md. Keeps sampling through garbage, damaged frames, unplugging and re-plugging: the
 * port is reopened with backoff once its close has completed, every loss is counted and reported
 * as a gap with exact sample-clock bounds, and problems are logged once per burst.
 *
 * serialport is loaded when the source opens, so nothing that merely imports this module needs
 * the native binding. The port must stay on the main thread (serialport does not work in workers).
 * Only serialport's binding is used (open, close, and its poller): `PortReader` reads the port,
 * which costs far less CPU than serialport's stream (see port-reader.ts).
 */
import type { SerialDriverConfig } from '../../agent/config/acquisition.js';
import { UserError } from '../../agent/errors.js';
import { BurstLog } from '../../agent/burst-log.js';
import type { Logger } from '../../agent/log.js';
import type { GapMarker, SampleSource, SourceInfo, SourceItem } from '../source.js';
import { BlockQueue } from './block-queue.js';
import { FrameDecoder, type DecodedFrame, type DecodeProblem, type FrameSink } from './frame.js';
import { PortReader, type ReadablePort } from './port-reader.js';
import { describeOpenFailure, listStablePorts } from './ports.js';

export interface SerialSourceOptions {
  /** Device path; prefer the stable /dev/serial/by-id/... link. */
  readonly device: string;
  readonly baud: number;
  /** What the board must send; other frames are rejected and counted. */
  readonly sampleRateHz: number;
  /** How far a frame's declared rate may be from sampleRateHz, ppm (default 100). */
  readonly sampleRateTolerancePpm?: number;
  readonly channels: number;
  /**
   * The config says the board times the tach (acquisition.board_tach_edges); frames that disagree
   * are reported once.
   */
  readonly boardTachEdges?: boolean;
  /** Most samples per channel in one frame (default 8192). */
  readonly maxSamplesPerChannel?: number;
  readonly reconnectMinMs: number;
  readonly reconnectMaxMs: number;
  readonly stallTimeoutMs: number;
  readonly queueFrames: number;
  readonly maxFrameBytes: number;
  readonly log: Logger;
  /** Wall clock, ms. */
  readonly nowMs?: () => number;
  /** Period of the housekeeping timer (stall check, log summaries), ms. */
  readonly tickMs?: number;
  /** Quiet time that ends a burst of log lines, ms (at least twice reconnectMaxMs). */
  readonly burstQuietMs?: number;
}

export function serialOptionsFromConfig(a: SerialDriverConfig, log: Logger): SerialSourceOptions {
  return {
    device: a.device,
    baud: a.baud,
    sampleRateHz: a.sample_rate_hz,
    sampleRateTolerancePpm: a.sample_rate_tolerance_ppm,
    channels: a.channels,
    boardTachEdges: a.board_tach_edges,
    maxSamplesPerChannel: a.max_samples_per_channel,
    reconnectMinMs: a.reconnect_min_ms,
    reconnectMaxMs: a.reconnect_max_ms,
    stallTimeoutMs: a.stall_timeout_ms,
    queueFrames: a.queue_frames,
    maxFrameBytes: a.max_frame_bytes,
    log,
  };
}

/**
 * Health counters, for the heartbeat and `turnwise probe-serial`. (A type, not an interface, so it
 * fits SourceHealth.)
 */
export type SerialHealth = {
  readonly device: string;
  readonly connected: boolean;
  readonly bytes_received: number;
  readonly frames_ok: number;
  readonly crc_errors: number;
  readonly bad_lengths: number;
  readonly bad_headers: number;
  readonly rejected_frames: number;
  readonly resyncs: number;
  readonly bytes_skipped: number;
  readonly gaps: number;
  readonly samples_lost: number;
  readonly sequence_anomalies: number;
  readonly clock_restarts: number;
  /** Version 2 frames with an impossible timing declaration (used with the last good one). */
  readonly timing_faults: number;
  /** Protocol version of the last good frame; null before the first. */
  readonly protocol_version: number | null;
  /**
   * Timing in use: declared by a version 2 board, or null (version 1: samples taken as simultaneous
   * and undelayed).
   */
  readonly sample_delay_ticks: number | null;
  readonly tach_delay_ticks: number | null;
  readonly max_skew_ticks: number | null;
  /**
   * Frames whose tach mode disagrees with acquisition.board_tach_edges (their edges, or the lack of
   * them, noted once).
   */
  readonly tach_mode_mismatches: number;
  /**
   * Bounds of the last gap on the agent's sample clock (first missing index, first index present
   * again), and why.
   */
  readonly last_gap_from_index: number | null;
  readonly last_gap_to_index: number | null;
  readonly last_gap_reason: string | null;
  /** DTR and RTS after the open: "asserted", or why not (a pseudo-terminal has no modem lines). */
  readonly modem_lines: string | null;
  /** Frames dropped because the DSP fell behind (included in gaps and samples_lost). */
  readonly overruns: number;
  /** Times an open device went silent for stall_timeout_ms and was reopened. */
  readonly stalls: number;
  /** Successful reopenings after the first open. */
  readonly reconnects: number;
  readonly open_failures: number;
  readonly last_error: string | null;
  /** ISO 8601 UTC. */
  readonly last_error_at: string | null;
};

type SerialPortModule = typeof import('serialport');

/** An open port of serialport's binding. */
interface OpenPort extends ReadablePort {
  close(): Promise<void>;
}

/**
 * Wait before reopen attempt number `attempt` (0 = first): doubling from `minMs`, capped at
 * `maxMs`.
 */
export function reconnectDelayMs(attempt: number, minMs: number, maxMs: number): number {
  return Math.min(maxMs, minMs * 2 ** Math.min(attempt, 30));
}

export class SerialSource implements SampleSource {
  private readonly opts: SerialSourceOptions;
  private readonly nowMs: () => number;
  private readonly log: Logger;
  private readonly burst: BurstLog;
  private readonly decoder: FrameDecoder;
  private readonly queue: BlockQueue;

  private mod: SerialPortModule | null = null;
  private port: OpenPort | null = null;
  private reader: PortReader | null = null;
  /** The port's close under way (after a failure or a stall), for close() to wait on. */
  private portClosing: Promise<void> | null = null;
  private opened = false;
  private closing = false;
  private everConnected = false;
  private connected = false;
  private attempt = 0;
  private reopenTimer: NodeJS.Timeout | null = null;
  private tickTimer: NodeJS.Timeout | null = null;
  private lastFrameMs = 0;
  /** Why this agent closed the port itself (stall), for the gap reason; null otherwise. */
  private closeReason: string | null = null;
  private stalls = 0;
  private reconnects = 0;
  private openFailures = 0;
  private lastError: string | null = null;
  private lastErrorAt: string | null = null;
  private closed: Promise<void> | null = null;
  private tachModeMismatches = 0;
  private lastGap: GapMarker | null = null;
  private modemLines: string | null = null;

  constructor(opts: SerialSourceOptions) {
    this.opts = opts;
    this.nowMs = opts.nowMs ?? Date.now;
    this.log = opts.log;
    // A burst must outlast the longest wait between reopen attempts, or an unplugged board would
    // start a new burst (and a new log line) at every attempt.
    this.burst = new BurstLog(opts.log, {
      nowMs: this.nowMs,
      quietMs: Math.max(opts.burstQuietMs ?? 10_000, 2 * opts.reconnectMaxMs),
    });
    this.queue = new BlockQueue(opts.queueFrames);
    const sink: FrameSink = {
      frame: (f) => this.onFrame(f),
      gap: (g) => this.onGap(g),
      problem: (kind, detail) => this.onProblem(kind, detail),
    };
    this.decoder = new FrameDecoder(sink, {
      limits: {
        maxFrameBytes: opts.maxFrameBytes,
        ...(opts.maxSamplesPerChannel !== undefined
          ? { maxSamplesPerChannel: opts.maxSamplesPerChannel }
          : {}),
      },
      expect: {
        channelCount: opts.channels,
        sampleRateHz: opts.sampleRateHz,
        sampleRateTolerancePpm: opts.sampleRateTolerancePpm,
      },
      nowMs: this.nowMs,
    });
  }

  async open(): Promise<SourceInfo> {
    if (this.opened) throw new Error('SerialSource.open() called twice');
    try {
      this.mod = await import('serialport');
    } catch (e) {
      throw new UserError(
        'acquisition.driver: serial',
        `the serialport native module could not be loaded (${(e as Error).message})`,
        'on this board run `npm rebuild @serialport/bindings-cpp` ' +
          '(needs build tools: build-essential, python3)',
      );
    }
    this.opened = true;
    this.tickTimer = setInterval(() => this.tick(), this.opts.tickMs ?? 1000);
    this.tryOpen();
    return {
      sampleRate: this.opts.sampleRateHz,
      channelCount: this.opts.channels,
      description: `serial board on ${this.opts.device}`,
    };
  }

  items(): AsyncIterable<SourceItem> {
    return this.queue.items();
  }

  health(): SerialHealth {
    const c = this.decoder.counters;
    const t = this.decoder.timing;
    const q = this.queue;
    return {
      device: this.opts.device,
      connected: this.connected,
      bytes_received: c.bytes_received,
      frames_ok: c.frames_ok,
      crc_errors: c.crc_errors,
      bad_lengths: c.bad_lengths,
      bad_headers: c.bad_headers,
      rejected_frames: c.rejected_frames,
      resyncs: c.resyncs,
      bytes_skipped: c.bytes_skipped,
      gaps: c.gaps + q.overrunGaps,
      samples_lost: c.samples_lost + q.overrunSamples,
      sequence_anomalies: c.sequence_anomalies,
      clock_restarts: c.clock_restarts,
      timing_faults: c.timing_faults,
      protocol_version: t.protocolVersion || null,
      sample_delay_ticks: t.declared ? t.sampleDelayTicks : null,
      tach_delay_ticks: t.declared ? t.tachDelayTicks : null,
      max_skew_ticks: t.declared ? t.maxSkewTicks : null,
      tach_mode_mismatches: this.tachModeMismatches,
      last_gap_from_index: this.lastGap?.fromIndex ?? null,
      last_gap_to_index: this.lastGap?.toIndex ?? null,
      last_gap_reason: this.lastGap?.reason ?? null,
      modem_lines: this.modemLines,
      overruns: q.overruns,
      stalls: this.stalls,
      reconnects: this.reconnects,
      open_failures: this.openFailures,
      last_error: this.lastError,
      last_error_at: this.lastErrorAt,
    };
  }

  close(): Promise<void> {
    if (this.closed) return this.closed;
    this.closing = true;
    if (this.reopenTimer) clearTimeout(this.reopenTimer);
    if (this.tickTimer) clearInterval(this.tickTimer);
    this.reopenTimer = this.tickTimer = null;
    const port = this.port;
    this.closed = (
      port ? this.closePort(port, null) : (this.portClosing ?? Promise.resolve())
    ).then(() => {
      this.port = null;
      this.connected = false;
      this.burst.flush(true);
      this.queue.end();
    });
    return this.closed;
  }

  private recordError(detail: string): void {
    this.lastError = detail;
    this.lastErrorAt = new Date(this.nowMs()).toISOString();
  }

  private onProblem(kind: DecodeProblem, detail: string): void {
    if (kind !== 'sequence') this.recordError(detail);
    this.burst.report(kind, `${this.opts.device}: ${detail}`, { device: this.opts.device });
  }

  private onGap(g: GapMarker): void {
    // Every gap, also those inside a burst that the warning summarises: bounds in the heartbeat and
    // a debug line.
    this.lastGap = g;
    this.log.debug(
      {
        device: this.opts.device,
        from_index: g.fromIndex,
        to_index: g.toIndex,
        samples: g.toIndex - g.fromIndex,
        clock_restart: g.clockRestart === true,
      },
      `${this.opts.device}: gap ${g.fromIndex} .. ${g.toIndex}: ${g.reason}`,
    );
    this.queue.pushGap(g);
  }

  private onFrame(f: DecodedFrame): void {
    this.lastFrameMs = this.nowMs();
    this.attempt = 0;
    let edges = f.tachEdges;
    const want = this.opts.boardTachEdges;
    if (want !== undefined && want !== (edges !== undefined)) {
      this.tachModeMismatches++;
      this.burst.report(
        'tach_mode',
        want
          ? `${this.opts.device}: acquisition.board_tach_edges is true but frame ` +
              `${f.sequence} does not set tach_timed (flags bit 0): no revolution can be ` +
              `averaged; set board_tach_edges: false and tach.channel, or fix the board`
          : `${this.opts.device}: frame ${f.sequence} carries board-timed tach edges ` +
              `but acquisition.board_tach_edges is false: the edges are ignored and the ` +
              `tach is found on tach.channel; set board_tach_edges: true to use them`,
        { device: this.opts.device },
      );
    }
    if (want === false) edges = undefined;
    this.queue.pushBlock(f.startIndex, f.channels, edges, this.lastFrameMs, f.channelDelays);
  }

  private tryOpen(): void {
    this.reopenTimer = null;
    if (this.closing) return;
    let opening: Promise<OpenPort>;
    try {
      // UART settings: 8 data bits, no parity, 1 stop bit, no flow control; DTR and RTS dropped on
      // close (hupcl).
      opening = this.mod!.SerialPort.binding.open({
        path: this.opts.device,
        baudRate: this.opts.baud,
        dataBits: 8,
        parity: 'none',
        stopBits: 1,
        rtscts: false,
        xon: false,
        xoff: false,
        hupcl: true,
      });
    } catch (e) {
      this.openFailed(e as Error);
      return;
    }
    opening.then(
      (port) => this.onOpened(port),
      (err: Error) => this.openFailed(err),
    );
  }

  private onOpened(port: OpenPort): void {
    if (this.closing) {
      void port.close().catch(() => {});
      return;
    }
    this.port = port;
    this.connected = true;
    this.lastFrameMs = this.nowMs();
    if (this.everConnected) this.reconnects++;
    const reader = new PortReader(port, {
      data: (chunk) => this.decoder.push(chunk),
      // A read error is the device going away (unplugged, hung up): close and reopen with backoff.
      failed: (err) => void this.closePort(port, err),
    });
    const what = this.everConnected ? 'reopened' : 'opened';
    this.everConnected = true;
    this.reader = reader;
    reader.start();
    // Says what became of DTR and RTS in the same line (once the ioctl has answered).
    void this.assertModemLines(port).then((lines) => {
      this.log.info(
        {
          device: this.opts.device,
          reconnects: this.reconnects,
          read_mode: reader.mode,
          modem_lines: lines,
        },
        `${this.opts.device}: ${what}, 8N1 at ${this.opts.baud} bit/s, DTR and RTS ${lines}`,
      );
    });
  }

  /**
   * Asserts DTR and RTS, as many USB CDC firmwares stream only once the host has raised DTR
   * ("terminal ready"). A pseudo-terminal has no modem lines: that is noted, not an error.
   */
  private async assertModemLines(port: OpenPort): Promise<string> {
    const p = port as OpenPort & { set?: (o: { dtr?: boolean; rts?: boolean }) => Promise<void> };
    if (typeof p.set !== 'function') this.modemLines = 'not available from this port';
    else {
      try {
        await p.set({ dtr: true, rts: true });
        this.modemLines = 'asserted';
      } catch (e) {
        this.modemLines =
          `not supported by the device (${(e as Error).message}; ` +
          `a pseudo-terminal has no modem lines)`;
      }
    }
    return this.modemLines;
  }

  /**
   * Stops reading and closes the port; `failure` is the read error that made it necessary, if any.
   */
  private closePort(port: OpenPort, failure: Error | null): Promise<void> {
    if (this.port !== port) return this.portClosing ?? Promise.resolve();
    this.port = null;
    this.reader?.stop();
    this.reader = null;
    const closing = (port.isOpen ? port.close() : Promise.resolve())
      .catch((e: Error) => {
        this.recordError(`${this.opts.device}: ${e.message}`);
        this.burst.report('port_error', `${this.opts.device}: port error on close: ${e.message}`, {
          device: this.opts.device,
        });
      })
      .then(() => {
        if (this.portClosing === closing) this.portClosing = null;
        this.onClosed(failure);
      });
    this.portClosing = closing;
    return closing;
  }

  private onClosed(failure: Error | null): void {
    this.connected = false;
    const why = failure
      ? `device disconnected (${failure.message})`
      : (this.closeReason ?? 'port closed');
    this.closeReason = null;
    this.decoder.linkDown(`${this.opts.device}: ${why}`);
    if (this.closing) return;
    this.recordError(`${this.opts.device}: ${why}`);
    this.burst.report('disconnect', `${this.opts.device}: ${why}; reopening with backoff`, {
      device: this.opts.device,
    });
    // Reopen only now that the close has completed: reopening a port still closing can fail with
    // "Cannot lock port".
    this.scheduleReopen();
  }

  private openFailed(err: Error): void {
    this.openFailures++;
    const f = describeOpenFailure(this.opts.device, err);
    this.recordError(f.detail);
    if (f.kind === 'not_found') {
      void listStablePorts().then((ports) => {
        const present = ports.length ? ports.map((p) => p.path).join(', ') : 'none';
        this.burst.report(
          'open_failed',
          `${f.detail}; ${f.hint}; stable serial links present now: ${present}`,
          { device: this.opts.device },
        );
      });
    } else this.burst.report('open_failed', `${f.detail}; ${f.hint}`, { device: this.opts.device });
    this.scheduleReopen();
  }

  private scheduleReopen(): void {
    if (this.closing || this.reopenTimer) return;
    const delay = reconnectDelayMs(
      this.attempt++,
      this.opts.reconnectMinMs,
      this.opts.reconnectMaxMs,
    );
    this.reopenTimer = setTimeout(() => this.tryOpen(), delay);
  }

  private tick(): void {
    const now = this.nowMs();
    if (this.connected && this.port && now - this.lastFrameMs >= this.opts.stallTimeoutMs) {
      this.stalls++;
      const silent = `no good frame for ${((now - this.lastFrameMs) / 1000).toFixed(1)} s`;
      this.recordError(`${this.opts.device}: ${silent}`);
      this.burst.report('stall', `${this.opts.device}: ${silent}; closing and reopening the port`, {
        device: this.opts.device,
      });
      // The close handler reopens with backoff.
      this.closeReason = `closed after ${silent}`;
      void this.closePort(this.port, null);
    }
    this.burst.flush();
  }
}
