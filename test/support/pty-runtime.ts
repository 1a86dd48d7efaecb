/**
 * The agent's measurement loop on a real pseudo-terminal: a socat pty pair (PtyPair), the real
 * SerialSource on one end, an AgentRuntime pulling from it, and the board's end open for the test
 * to write frames into. `dispose()` (in afterEach) closes whatever was opened.
 */
import { ManualClock } from '../../agent/clock.js';
import { MemoryLogger } from '../../agent/log.js';
import { AgentRuntime, type RuntimeOptions } from '../../agent/runtime/runtime.js';
import { DeviceWriter } from '../../drivers/serial/board-emulator.js';
import { SerialSource, type SerialSourceOptions } from '../../drivers/serial/serial-source.js';
import { PtyPair } from './pty-pair.js';

export type RigSourceOptions = Pick<SerialSourceOptions, 'sampleRateHz' | 'channels'> &
  Partial<SerialSourceOptions>;
export type RigRuntimeOptions = Omit<RuntimeOptions, 'source' | 'clock' | 'logger'> &
  Partial<Pick<RuntimeOptions, 'clock'>>;

export class PtyRuntimeRig {
  readonly pty = new PtyPair();
  readonly log = new MemoryLogger();
  source: SerialSource | null = null;
  writer: DeviceWriter | null = null;
  runtime: AgentRuntime | null = null;
  private running: Promise<unknown> | null = null;

  /**
   * Starts socat, the source and the runtime; resolves once the port is open and the board's end
   * can be written.
   */
  async start(
    src: RigSourceOptions,
    rt: RigRuntimeOptions,
  ): Promise<{ source: SerialSource; writer: DeviceWriter; runtime: AgentRuntime }> {
    await this.pty.start();
    const source = new SerialSource({
      device: this.pty.agentPath,
      baud: 921_600,
      reconnectMinMs: 100,
      reconnectMaxMs: 400,
      stallTimeoutMs: 60_000,
      queueFrames: 4096,
      maxFrameBytes: 65_536,
      log: this.log,
      tickMs: 50,
      ...src,
    });
    this.source = source;
    const runtime = new AgentRuntime({ clock: new ManualClock(), logger: this.log, ...rt, source });
    this.runtime = runtime;
    this.running = runtime.run();
    const t0 = Date.now();
    while (!source.health().connected) {
      if (Date.now() - t0 > 10_000)
        throw new Error(`the serial source did not open ${this.pty.agentPath}`);
      await new Promise((r) => setTimeout(r, 20));
    }
    this.writer = await DeviceWriter.open(this.pty.boardPath);
    return { source, writer: this.writer, runtime };
  }

  /**
   * Waits until the source has accepted `frames` frames (at most `timeoutMs`), lets the loop catch
   * up, and stops the runtime.
   */
  async finish(frames: number | null, timeoutMs = 10_000): Promise<void> {
    const t0 = Date.now();
    if (frames !== null)
      while (this.source!.health().frames_ok < frames && Date.now() - t0 < timeoutMs)
        await new Promise((r) => setTimeout(r, 20));
    await new Promise((r) => setTimeout(r, frames === null ? 200 : 100));
    this.runtime!.stop();
    await this.running;
  }

  async dispose(): Promise<void> {
    await this.source?.close();
    await this.writer?.close().catch(() => {});
    await this.pty.dispose();
  }
}
