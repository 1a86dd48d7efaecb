/**
 * A real pseudo-terminal pair made by socat (Debian package socat): bytes written to `boardPath`
 * come out of `agentPath`, as from an acquisition board on a serial port. Stopping socat makes the
 * device vanish (both links are removed), like unplugging the board; `start()` plugs it back in.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

export class PtyPair {
  readonly dir: string;
  readonly boardPath: string;
  readonly agentPath: string;
  private proc: ChildProcess | null = null;
  private stderr = '';

  constructor() {
    this.dir = mkdtempSync(join(tmpdir(), 'tw-pty-'));
    this.boardPath = join(this.dir, 'board');
    this.agentPath = join(this.dir, 'agent');
  }

  /** Starts socat and waits until both links exist. */
  async start(timeoutMs = 5000): Promise<void> {
    if (this.proc) throw new Error('socat already running');
    this.stderr = '';
    const p = spawn(
      'socat',
      [`pty,rawer,link=${this.boardPath}`, `pty,rawer,link=${this.agentPath}`],
      { stdio: ['ignore', 'ignore', 'pipe'] },
    );
    p.stderr!.on('data', (d: Buffer) => (this.stderr += d.toString()));
    this.proc = p;
    const t0 = Date.now();
    while (!(existsSync(this.boardPath) && existsSync(this.agentPath))) {
      if (p.exitCode !== null) throw new Error(`socat exited with ${p.exitCode}: ${this.stderr}`);
      if (Date.now() - t0 > timeoutMs)
        throw new Error(
          `socat did not create ${this.boardPath} and ` +
            `${this.agentPath} within ${timeoutMs} ms: ${this.stderr}`,
        );
      await new Promise((r) => setTimeout(r, 20));
    }
  }

  /** Stops socat (SIGTERM) and waits until it has exited and removed its links. */
  async stop(): Promise<void> {
    const p = this.proc;
    if (!p) return;
    this.proc = null;
    if (p.exitCode === null && p.signalCode === null) {
      const exited = new Promise((r) => p.once('exit', r));
      p.kill('SIGTERM');
      await exited;
    }
  }

  async dispose(): Promise<void> {
    await this.stop();
    rmSync(this.dir, { recursive: true, force: true });
  }
}
