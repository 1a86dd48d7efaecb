/**
 * Reads an open serial port (a port of serialport's binding) and hands each chunk to a sink until
 * the port fails or the reader is stopped.
 *
 * On Linux and macOS the binding exposes the port's non-blocking file descriptor and its poller:
 * each time the poller reports the port readable, one read() on the main thread into one buffer
 * reused for every read. serialport's own stream instead sends every read to libuv's thread pool,
 * where the non-blocking descriptor usually answers EAGAIN first (an exception and a rejected
 * promise), then waits for the poller and reads again in the pool: two thread hand-overs and
 * several promises per chunk of at most 4 KiB (the tty layer's read size), some 200 times a second
 * at 8 channels x 25.6 kHz x int24. Where the binding has no poller (Windows) its read() is used.
 *
 * The chunk handed to `data` is valid only during the call: the next read overwrites it.
 */
import { readSync } from 'node:fs';

/**
 * What the reader needs of a binding port (serialport's LinuxPortBinding and DarwinPortBinding have
 * it all).
 */
export interface ReadablePort {
  readonly isOpen: boolean;
  read(buffer: Buffer, offset: number, length: number): Promise<{ bytesRead: number }>;
  /** The open, non-blocking file descriptor (Linux, macOS). */
  readonly fd?: number | null;
  /**
   * Calls back once when the descriptor is readable, or with an error (`canceled` when the port
   * closed).
   */
  readonly poller?: { once(event: 'readable', callback: (err: Error | null) => void): unknown };
}

export interface PortReaderSink {
  /** Bytes as they arrived; the buffer is reused after the call returns. */
  data(chunk: Buffer): void;
  /**
   * The port failed (device gone, read error, hang-up): called once, after which the reader has
   * stopped. Never after stop().
   */
  failed(err: Error): void;
}

export type ReadMode = 'poll' | 'binding';

const canceled = (e: unknown) => (e as { canceled?: boolean } | null)?.canceled === true;
const RETRY = new Set(['EAGAIN', 'EWOULDBLOCK', 'EINTR']);

export class PortReader {
  /**
   * How this port is read: `poll` (poller + read on the main thread) where the binding allows it.
   */
  readonly mode: ReadMode;
  /** read() calls that returned bytes. */
  reads = 0;
  private readonly buf: Buffer;
  private stopped = false;
  private started = false;

  constructor(
    private readonly port: ReadablePort,
    private readonly sink: PortReaderSink,
    opts: { bufferBytes?: number; mode?: ReadMode } = {},
  ) {
    this.buf = Buffer.allocUnsafe(opts.bufferBytes ?? 65_536);
    this.mode = opts.mode ?? (port.poller && typeof port.fd === 'number' ? 'poll' : 'binding');
    if (this.mode === 'poll' && !port.poller)
      throw new Error('PortReader: this port has no poller to read it by polling');
  }

  start(): void {
    if (this.started) throw new Error('PortReader.start() called twice');
    this.started = true;
    if (this.mode === 'poll') this.waitReadable();
    else void this.readLoop();
  }

  /** No more calls to the sink. Closing the port is the owner's business. */
  stop(): void {
    this.stopped = true;
  }

  private fail(err: Error): void {
    if (this.stopped) return;
    this.stopped = true;
    this.sink.failed(err);
  }

  /** One chunk read: `n` bytes, or 0 for end of file (a hung-up tty), which ends reading. */
  private deliver(n: number): void {
    if (n === 0) {
      this.fail(new Error('the device hung up (read returned end of file)'));
      return;
    }
    this.reads++;
    this.sink.data(this.buf.subarray(0, n));
  }

  private waitReadable(): void {
    this.port.poller!.once('readable', this.onReadable);
  }

  private readonly onReadable = (err: Error | null): void => {
    if (this.stopped) return;
    if (err) {
      // Canceled: the port was closed, and whoever closed it knows why.
      if (!canceled(err)) this.fail(err);
      return;
    }
    const fd = this.port.fd;
    if (!this.port.isOpen || typeof fd !== 'number') return;
    let n: number;
    try {
      n = readSync(fd, this.buf, 0, this.buf.length, null);
    } catch (e) {
      if (RETRY.has((e as NodeJS.ErrnoException).code ?? '')) this.waitReadable();
      else this.fail(e as Error);
      return;
    }
    this.deliver(n);
    if (!this.stopped) this.waitReadable();
  };

  private async readLoop(): Promise<void> {
    while (!this.stopped) {
      let n: number;
      try {
        n = (await this.port.read(this.buf, 0, this.buf.length)).bytesRead;
      } catch (e) {
        if (!canceled(e)) this.fail(e as Error);
        return;
      }
      if (this.stopped) return;
      this.deliver(n);
    }
  }
}
