/**
 * A one-way byte link from this process into a serial device, made by socat (Debian package socat):
 * bytes written here go to socat's stdin and come out of either a new pseudo-terminal, reachable
 * through a symbolic link the agent can open as its board (`pty`), or an existing serial device set
 * to raw mode at a baud rate (`device`, e.g. one end of a null-modem cable).
 *
 * Like a board whose host stops reading, the link never blocks its writer: when the reader falls
 * behind and socat's backlog passes `maxBacklogBytes`, whole frames are dropped (and counted), so
 * the agent sees a sequence gap, never a torn frame.
 *
 * `stop()` ends socat at once and waits until it has removed its link. Should this process die
 * without stopping it (even by SIGKILL), socat ends too: started through setpriv (util-linux) with
 * a parent-death signal where setpriv is installed, and in any case when it next reads its closed
 * stdin (it does not read while the pseudo-terminal is full, hence setpriv).
 */
import { spawn, type ChildProcess } from 'node:child_process';
import {
  accessSync,
  constants,
  existsSync,
  lstatSync,
  readlinkSync,
  statSync,
  unlinkSync,
} from 'node:fs';
import { delimiter, dirname, join, resolve } from 'node:path';
import { UserError } from '../../agent/errors.js';

export type SocatTarget =
  /** A new pseudo-terminal; `link` becomes a symbolic link to it (the path to give the agent). */
  | { readonly kind: 'pty'; readonly link: string }
  /** An existing serial device, opened raw at `baud` bits/s. */
  | { readonly kind: 'device'; readonly path: string; readonly baud: number };

export interface SocatLinkOptions {
  /** How long socat may take to make the link, ms. */
  readonly startTimeoutMs?: number;
  /**
   * Bytes held in this process for socat (beyond the pipe's own buffer) past which frames are
   * dropped; default 256 KiB. About a second of frames rides out a stall of either process without
   * loss.
   */
  readonly maxBacklogBytes?: number;
}

export interface SocatExit {
  readonly code: number | null;
  readonly signal: NodeJS.Signals | null;
}

const INSTALL_HINT = 'install socat (Debian/Ubuntu: apt-get install socat) and try again';

/** The first executable file called `name` in a folder of PATH, or null. */
function onPath(name: string): string | null {
  for (const dir of (process.env.PATH ?? '').split(delimiter)) {
    if (!dir) continue;
    const file = join(dir, name);
    try {
      accessSync(file, constants.X_OK);
      if (statSync(file).isFile()) return file;
    } catch {
      // not here
    }
  }
  return null;
}

/** Before socat makes `link`: refuse a path in use, clear a link left behind by an earlier run. */
function prepareLinkPath(link: string): void {
  let st;
  try {
    st = lstatSync(link);
  } catch {
    if (!existsSync(dirname(link)))
      throw new UserError(
        link,
        `folder ${dirname(link)} does not exist`,
        'create it, or choose another --link path',
      );
    return;
  }
  if (!st.isSymbolicLink())
    throw new UserError(
      link,
      'already exists and is not a link to a pseudo-terminal',
      'choose another --link path; the file there is left alone',
    );
  const target = resolve(dirname(link), readlinkSync(link));
  if (existsSync(target)) {
    throw new UserError(
      link,
      `already links to ${target}, a device that exists (another simulated board still running?)`,
      'stop the other one, or choose another --link path',
    );
  }
  unlinkSync(link);
}

export class SocatLink {
  /** Resolves when socat has exited, for whatever reason. */
  readonly exited: Promise<SocatExit>;
  private dropped = 0;
  private sent = 0;
  private stderrText = '';
  private exit: SocatExit | null = null;

  private constructor(
    private readonly proc: ChildProcess,
    readonly target: SocatTarget,
    private readonly maxBacklog: number,
  ) {
    proc.stderr!.setEncoding('utf8');
    proc.stderr!.on('data', (d: string) => {
      // keep the last few kB for messages
      this.stderrText = (this.stderrText + d).slice(-4096);
    });
    // A broken pipe after socat died is reported through `exited`, not as an uncaught error.
    proc.stdin!.on('error', () => {});
    this.exited = new Promise((res) => {
      proc.once('exit', (code, signal) => {
        this.exit = { code, signal };
        res(this.exit);
      });
    });
  }

  /**
   * Starts socat and waits until the link (or the device) is ready. Rejects with a UserError naming
   * the problem.
   */
  static async start(target: SocatTarget, opts: SocatLinkOptions = {}): Promise<SocatLink> {
    const socat = onPath('socat');
    if (!socat)
      throw new UserError(
        'socat',
        'socat is not installed (it makes the serial link)',
        INSTALL_HINT,
      );
    const path = target.kind === 'pty' ? target.link : target.path;
    // socat would read these as the end of the path (",": options follow; "!!": a second address)
    if (/[,!]/.test(path))
      throw new UserError(
        path,
        'socat cannot take a path with "," or "!" in it',
        'choose a path without them',
      );
    if (target.kind === 'pty') prepareLinkPath(target.link);
    else if (!existsSync(target.path))
      throw new UserError(
        target.path,
        'no such device',
        'give the serial device to write to (e.g. /dev/ttyUSB0), ' +
          'or leave --device out to make a pseudo-terminal',
      );
    const out =
      target.kind === 'pty'
        ? `pty,rawer,link=${target.link}`
        : `${target.path},rawer,b${target.baud}`;
    const args = ['-d', '-d', '-u', 'STDIN', out];
    const setpriv = onPath('setpriv');
    // Its own process group: Ctrl-C in the terminal reaches this process only, which then stops
    // socat.
    const proc = setpriv
      ? spawn(setpriv, ['--pdeathsig', 'TERM', '--', socat, ...args], {
          stdio: ['pipe', 'ignore', 'pipe'],
          detached: true,
        })
      : spawn(socat, args, { stdio: ['pipe', 'ignore', 'pipe'], detached: true });
    const spawned = await new Promise<Error | null>((res) => {
      proc.once('spawn', () => res(null));
      proc.once('error', (e) => res(e));
    });
    if (spawned) {
      const code = (spawned as NodeJS.ErrnoException).code;
      throw new UserError(socat, `cannot start socat (${code ?? spawned.message})`, INSTALL_HINT);
    }
    const link = new SocatLink(proc, target, opts.maxBacklogBytes ?? 256 * 1024);
    try {
      await link.waitReady(opts.startTimeoutMs ?? 5000);
    } catch (e) {
      await link.stop();
      throw e;
    }
    return link;
  }

  private async waitReady(timeoutMs: number): Promise<void> {
    const t0 = Date.now();
    const where = this.target.kind === 'pty' ? this.target.link : this.target.path;
    for (;;) {
      if (this.exit) {
        throw new UserError(
          where,
          `socat stopped at once (exit ${this.exit.code ?? this.exit.signal}; ` +
            `its last message: "${this.lastMessage()}")`,
          this.target.kind === 'device'
            ? 'check the device path, its permissions (dialout group) and the baud rate'
            : 'check that the link folder is writable',
        );
      }
      if (this.isReady()) return;
      if (Date.now() - t0 > timeoutMs)
        throw new UserError(
          where,
          `socat did not get ready within ${timeoutMs} ms: ${this.lastMessage()}`,
          'try again; if it persists, run socat by hand to see why',
        );
      await new Promise((r) => setTimeout(r, 20));
    }
  }

  private isReady(): boolean {
    if (this.target.kind === 'device') return /starting data transfer loop/.test(this.stderrText);
    // socat names its pseudo-terminal, then makes the link to it
    const pty = /PTY is (\S+)/.exec(this.stderrText)?.[1];
    if (!pty) return false;
    try {
      return resolve(dirname(this.target.link), readlinkSync(this.target.link)) === pty;
    } catch {
      return false;
    }
  }

  /** socat's last error line, else its last line (without time stamp and level). */
  lastMessage(): string {
    const lines = this.stderrText.trim().split('\n').filter(Boolean);
    const errors = lines.filter((l) => / socat\[\d+\] E /.test(l));
    const last = errors[errors.length - 1] ?? lines[lines.length - 1] ?? '(no message)';
    return last.replace(/^\S+ \S+ socat\[\d+\] [A-Z] /, '');
  }

  /**
   * Hands one frame to socat, or drops it whole when socat's backlog is full (the reader is not
   * keeping up, or nobody has the device open). Returns false when dropped; throws once socat has
   * exited.
   */
  write(frame: Uint8Array): boolean {
    if (this.exit) {
      const how =
        this.exit.code !== null ? `exit code ${this.exit.code}` : `signal ${this.exit.signal}`;
      throw new UserError(
        this.target.kind === 'pty' ? this.target.link : this.target.path,
        `socat stopped unexpectedly (${how}; its last message: "${this.lastMessage()}")`,
        this.target.kind === 'device'
          ? 'check that the device is still there, then start again'
          : 'start again; did something else stop socat?',
      );
    }
    const stdin = this.proc.stdin!;
    if (stdin.writableLength > this.maxBacklog) {
      this.dropped++;
      return false;
    }
    stdin.write(frame);
    this.sent++;
    return true;
  }

  /** socat's process id. */
  get pid(): number | undefined {
    return this.proc.pid;
  }

  get framesSent(): number {
    return this.sent;
  }

  get framesDropped(): number {
    return this.dropped;
  }

  /** Ends socat (SIGTERM) and waits until it has exited and removed its link. */
  async stop(): Promise<SocatExit> {
    if (!this.exit) {
      this.proc.stdin!.destroy();
      this.proc.kill('SIGTERM');
    }
    return this.exited;
  }
}
