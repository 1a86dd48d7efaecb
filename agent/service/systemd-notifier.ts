import { spawn, type ChildProcess } from 'node:child_process';
import type { Logger } from '../log.js';
import { BurstLog } from '../burst-log.js';
import { systemTimers, type Timers } from '../timers.js';
import { NoopNotifier, notifyMessage, type ServiceNotifier } from './notifier.js';

/**
 * sd_notify for Node. The protocol is one datagram on the AF_UNIX SOCK_DGRAM socket named by
 * NOTIFY_SOCKET, and Node has no unix datagram sockets. The choices, and why this one:
 *
 * - Spawning `systemd-notify` per message: systemd attributes a message to a unit by reading the
 *   sender's /proc/PID/cgroup; a sender that has already exited cannot be attributed and its
 *   message is dropped ("Cannot find unit for notify message", systemd issue #2737; sd_notify(3)
 *   documents the race). A dropped READY=1 fails the start; dropped WATCHDOG=1 pings get a
 *   healthy agent killed.
 * - A native addon (unix-dgram, sd-notify): a third native build on the board next to epoll and
 *   serialport, and these addons have broken with new Node majors (unix-dgram issues #62, #64);
 *   sd-notify also needs libsystemd-dev.
 * - Chosen: one long-lived relay, python3 with its standard socket module, reading one JSON string
 *   per line on stdin and sending each as one datagram. It lives as long as the agent, so every
 *   message comes from a live process in the service's cgroup (the unit sets NotifyAccess=all).
 *   python3 is on the board anyway: node-gyp needs it to build epoll, and deploy/install.sh
 *   installs it.
 *
 * The relay is restarted with back-off if it dies; up to 16 messages wait for it meanwhile. The
 * first failure is logged as an error; repeats are counted and summarised (BurstLog, flushed on
 * every message, i.e. at least every watchdog period).
 */

/**
 * The relay program. It travels in the environment so that the process list and
 * `systemctl status` show one short line, `python3 ... turnwise-sd-notify-relay`, not the code.
 * Send errors go to stderr, one line each.
 */
export const RELAY_PY = `
import json, os, socket, sys
addr = os.environ["NOTIFY_SOCKET"]
if addr.startswith("@"):
    addr = "\\0" + addr[1:]
s = socket.socket(socket.AF_UNIX, socket.SOCK_DGRAM)
for line in iter(sys.stdin.buffer.readline, b""):
    try:
        s.sendto(json.loads(line).encode("utf-8"), addr)
    except Exception as e:
        sys.stderr.write("sending to NOTIFY_SOCKET failed: %s\\n" % e)
        sys.stderr.flush()
`;

/**
 * Half of WATCHDOG_USEC in ms, or null when there is no watchdog for this process
 * (sd_watchdog_enabled(3)).
 */
export function watchdogPingMsFromEnv(env: NodeJS.ProcessEnv, pid: number): number | null {
  const usec = env.WATCHDOG_USEC;
  if (!usec) return null;
  if (env.WATCHDOG_PID && Number(env.WATCHDOG_PID) !== pid) return null;
  const n = Number(usec);
  return Number.isFinite(n) && n > 0 ? n / 2000 : null;
}

export interface SystemdNotifierOptions {
  logger: Logger;
  /** Where NOTIFY_SOCKET, WATCHDOG_USEC and WATCHDOG_PID are read. Default process.env. */
  env?: NodeJS.ProcessEnv;
  /** Default process.pid (compared with WATCHDOG_PID). */
  pid?: number;
  /** The python interpreter. Default 'python3' (looked up on PATH). */
  python?: string;
  timers?: Timers;
}

/** SystemdNotifier when NOTIFY_SOCKET is set (started by systemd), NoopNotifier otherwise. */
export function createServiceNotifier(opts: SystemdNotifierOptions): ServiceNotifier {
  const env = opts.env ?? process.env;
  const socketName = env.NOTIFY_SOCKET;
  if (!socketName) return new NoopNotifier();
  if (!socketName.startsWith('/') && !socketName.startsWith('@')) {
    opts.logger.error(
      { notify_socket: socketName },
      'NOTIFY_SOCKET is neither a path nor an abstract socket name; systemd ' +
        'will not hear from the agent and will restart it after its start ' +
        'timeout. Run it from the shipped unit file (deploy/turnwise.service)',
    );
    return new NoopNotifier();
  }
  return new SystemdNotifier(socketName, opts);
}

const MAX_QUEUED = 16;
// Long enough for python3 to start on a loaded board and send what it was given.
const CLOSE_WAIT_MS = 5000;

export class SystemdNotifier implements ServiceNotifier {
  readonly active = true;
  readonly watchdogPingMs: number | null;
  private readonly logger: Logger;
  private readonly timers: Timers;
  private readonly problems: BurstLog;
  private readonly python: string;
  private readonly path: string;
  private child: ChildProcess | null = null;
  /** Messages written while no relay runs; sent when it is back. */
  private readonly queue: string[] = [];
  private failures = 0;
  private startedAt = 0;
  private cancelRestart: (() => void) | null = null;
  private closing: Promise<void> | null = null;

  constructor(
    private readonly socketName: string,
    opts: SystemdNotifierOptions,
  ) {
    const env = opts.env ?? process.env;
    this.logger = opts.logger;
    this.timers = opts.timers ?? systemTimers;
    this.problems = new BurstLog(this.logger, {
      nowMs: () => this.timers.now(),
      quietMs: 5 * 60_000,
      summaryEveryMs: 10 * 60_000,
    });
    this.python = opts.python ?? 'python3';
    this.path = env.PATH ?? '/usr/local/bin:/usr/bin:/bin';
    this.watchdogPingMs = watchdogPingMsFromEnv(env, opts.pid ?? process.pid);
    this.startRelay();
  }

  ready(status?: string): void {
    this.send(notifyMessage('READY=1', status));
  }
  status(text: string): void {
    this.send(notifyMessage(null, text));
  }
  watchdog(): void {
    this.send('WATCHDOG=1');
  }
  stopping(status?: string): void {
    this.send(notifyMessage('STOPPING=1', status));
  }

  close(): Promise<void> {
    this.closing ??= this.shutdown();
    return this.closing;
  }

  private async shutdown(): Promise<void> {
    this.cancelRestart?.();
    this.problems.flush(true);
    const child = this.child;
    if (!child || child.exitCode !== null || child.signalCode !== null) return;
    await new Promise<void>((resolve) => {
      const cancel = this.timers.after(CLOSE_WAIT_MS, () => {
        child.kill('SIGKILL');
        resolve();
      });
      child.once('exit', () => {
        cancel();
        resolve();
      });
      child.stdin?.end(); // the relay sends what it has read, then sees EOF and exits
    });
  }

  private send(msg: string): void {
    if (this.closing) return;
    this.problems.flush();
    const line = JSON.stringify(msg) + '\n';
    const stdin = this.child?.stdin;
    if (stdin && stdin.writable) {
      stdin.write(line);
      return;
    }
    if (this.queue.length >= MAX_QUEUED) this.queue.shift();
    this.queue.push(line);
  }

  private startRelay(): void {
    this.cancelRestart = null;
    this.startedAt = this.timers.now();
    const child = spawn(
      this.python,
      [
        '-I',
        '-S',
        '-c',
        'import os; exec(os.environ["TURNWISE_RELAY_PY"])',
        'turnwise-sd-notify-relay',
      ],
      {
        stdio: ['pipe', 'ignore', 'pipe'],
        env: {
          NOTIFY_SOCKET: this.socketName,
          TURNWISE_RELAY_PY: RELAY_PY,
          PATH: this.path,
          LC_ALL: 'C.UTF-8',
        },
      },
    );
    this.child = child;
    child.stdin!.on('error', () => {}); // EPIPE when the relay died; the 'exit' handler restarts it
    child.stderr!.setEncoding('utf8');
    let partial = '';
    child.stderr!.on('data', (chunk: string) => {
      const lines = (partial + chunk).split('\n');
      partial = lines.pop()!;
      for (const l of lines) {
        if (l.trim())
          this.problems.report(
            'sd-notify-send',
            'the sd_notify relay could not send a message to systemd',
            { relay_said: l.trim() },
          );
      }
    });
    child.on('error', (err) => {
      // Spawn failed (python3 missing): no 'exit' follows.
      this.relayGone(child, `cannot start ${this.python}: ${err.message}`);
    });
    child.on('exit', (code, signal) => {
      this.relayGone(child, `exited with ${signal ?? `code ${code}`}`);
    });
    for (const line of this.queue.splice(0)) child.stdin!.write(line);
  }

  private relayGone(child: ChildProcess, why: string): void {
    if (this.child !== child) return; // already handled ('error' and 'exit' can both come)
    this.child = null;
    if (this.closing) return;
    if (this.timers.now() - this.startedAt > 60_000) this.failures = 0;
    this.failures++;
    const delayMs = Math.min(60_000, 1000 * 2 ** (this.failures - 1));
    const fields = { reason: why, python: this.python, retry_in_s: delayMs / 1000 };
    const msg =
      'the sd_notify relay stopped: systemd hears nothing from the agent ' +
      'until it is back, and restarts the service when its watchdog runs ' +
      'out. Check that python3 is installed (deploy/install.sh installs it)';
    if (this.failures === 1) this.logger.error(fields, msg);
    else this.problems.report('sd-notify-relay', msg, fields);
    this.cancelRestart = this.timers.after(delayMs, () => this.startRelay());
  }
}
