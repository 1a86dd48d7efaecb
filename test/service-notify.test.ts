import { afterEach, describe, expect, it } from 'vitest';
import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync, mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { MemoryLogger } from '../agent/log.js';
import { MemoryNotifier, NoopNotifier, notifyMessage } from '../agent/service/notifier.js';
import {
  createServiceNotifier,
  SystemdNotifier,
  watchdogPingMsFromEnv,
} from '../agent/service/systemd-notifier.js';
import { WatchdogKeeper } from '../agent/service/watchdog.js';
import { FakeTimers } from './support/fake-timers.js';

const RECEIVER = fileURLToPath(new URL('./support/notify-receiver.py', import.meta.url));
// The relay's interpreter: Debian's own, as on the board (a version-manager shim earlier on PATH
// can take seconds to start on a loaded machine).
const PYTHON = existsSync('/usr/bin/python3') ? '/usr/bin/python3' : 'python3';

interface Datagram {
  pid: number | null;
  msg: string;
}

/**
 * A real AF_UNIX datagram socket bound by python3, receiving the way systemd's notify socket does
 * (with SO_PASSCRED, so each datagram carries the sender's pid).
 */
class Receiver {
  readonly got: Datagram[] = [];
  private waiters: Array<() => void> = [];
  private constructor(private readonly proc: ChildProcess) {}

  static async start(name: string): Promise<Receiver> {
    const proc = spawn('python3', [RECEIVER, name, '20'], { stdio: ['ignore', 'pipe', 'inherit'] });
    const r = new Receiver(proc);
    let buf = '';
    await new Promise<void>((resolve, reject) => {
      proc.on('error', reject);
      proc.stdout!.setEncoding('utf8');
      proc.stdout!.on('data', (chunk: string) => {
        buf += chunk;
        let nl: number;
        while ((nl = buf.indexOf('\n')) >= 0) {
          const line = buf.slice(0, nl);
          buf = buf.slice(nl + 1);
          if (line === 'READY') resolve();
          else {
            r.got.push(JSON.parse(line) as Datagram);
            for (const w of r.waiters.splice(0)) w();
          }
        }
      });
    });
    receivers.push(r);
    return r;
  }

  /** Resolves once `n` datagrams have arrived; fails after `ms`. */
  async waitFor(n: number, ms = 10_000): Promise<Datagram[]> {
    const deadline = Date.now() + ms;
    while (this.got.length < n) {
      if (Date.now() > deadline)
        throw new Error(
          `expected ${n} datagrams, got ${this.got.length}: ${JSON.stringify(this.got)}`,
        );
      await new Promise<void>((res) => {
        this.waiters.push(res);
        setTimeout(res, 100);
      });
    }
    return this.got.slice(0, n);
  }

  stop(): void {
    this.proc.kill();
  }
}

const receivers: Receiver[] = [];
const notifiers: SystemdNotifier[] = [];
afterEach(async () => {
  for (const n of notifiers.splice(0)) await n.close();
  for (const r of receivers.splice(0)) r.stop();
});

function tmpSocket(): string {
  return join(mkdtempSync(join(tmpdir(), 'tw-notify-')), 'notify.sock');
}

function notifier(env: NodeJS.ProcessEnv, logger = new MemoryLogger()): SystemdNotifier {
  const n = createServiceNotifier({
    logger,
    env: { PATH: process.env.PATH, ...env },
    python: PYTHON,
  });
  expect(n).toBeInstanceOf(SystemdNotifier);
  notifiers.push(n as SystemdNotifier);
  return n as SystemdNotifier;
}

describe('sd_notify over a real unix datagram socket', () => {
  it('delivers READY, STATUS, WATCHDOG and STOPPING as systemd expects them, all from one long-lived sender', async () => {
    const path = tmpSocket();
    const rx = await Receiver.start(path);
    const n = notifier({
      NOTIFY_SOCKET: path,
      WATCHDOG_USEC: '30000000',
      WATCHDOG_PID: String(process.pid),
    });
    expect(n.active).toBe(true);
    expect(n.watchdogPingMs).toBe(15_000); // half of WatchdogSec=30s, sd_watchdog_enabled(3)
    n.ready('watching kessrow-id3a (invented demo fan)');
    n.watchdog();
    n.status('zone B, 1x 3.1 mm/s\nsecond line');
    n.watchdog();
    n.stopping('shutting down on SIGTERM');
    await n.close(); // flushes: everything sent before close() returns
    const got = await rx.waitFor(5);
    expect(got.map((d) => d.msg)).toEqual([
      'READY=1\nSTATUS=watching kessrow-id3a (invented demo fan)',
      'WATCHDOG=1',
      'STATUS=zone B, 1x 3.1 mm/s second line',
      'WATCHDOG=1',
      'STOPPING=1\nSTATUS=shutting down on SIGTERM',
    ]);
    // One sender for every message (the relay, a child of this process): never a process per
    // message that could exit before systemd reads its cgroup.
    const pids = new Set(got.map((d) => d.pid));
    expect(pids.size).toBe(1);
    expect([...pids][0]).not.toBe(process.pid);
    expect(typeof [...pids][0]).toBe('number');
  });

  it('supports abstract socket names (NOTIFY_SOCKET=@name)', async () => {
    const name = `@turnwise-test-${process.pid}-${Date.now()}`;
    const rx = await Receiver.start(name);
    const n = notifier({ NOTIFY_SOCKET: name });
    expect(n.watchdogPingMs).toBeNull();
    n.ready();
    await n.close();
    expect((await rx.waitFor(1)).map((d) => d.msg)).toEqual(['READY=1']);
  });

  it('restarts a relay that died and delivers what was sent meanwhile, logging the outage once', async () => {
    const path = tmpSocket();
    const rx = await Receiver.start(path);
    const log = new MemoryLogger();
    const n = notifier({ NOTIFY_SOCKET: path }, log);
    n.status('one');
    const [first] = await rx.waitFor(1);
    process.kill(first!.pid!, 'SIGKILL');
    await new Promise((r) => setTimeout(r, 200));
    n.status('two');
    n.watchdog();
    const got = await rx.waitFor(3);
    expect(got.map((d) => d.msg)).toEqual(['STATUS=one', 'STATUS=two', 'WATCHDOG=1']);
    expect(got[1]!.pid).not.toBe(first!.pid);
    const errors = log.lines.filter((l) => l.level === 'error');
    expect(errors).toHaveLength(1);
    expect(errors[0]!.msg).toMatch(/sd_notify relay stopped/);
    expect(errors[0]!.fields).toMatchObject({ reason: 'exited with SIGKILL', retry_in_s: 1 });
  });

  it('says loudly, without throwing, when python3 cannot be started', async () => {
    const log = new MemoryLogger();
    const n = createServiceNotifier({
      logger: log,
      env: { NOTIFY_SOCKET: tmpSocket() },
      python: '/nonexistent/python3',
    }) as SystemdNotifier;
    notifiers.push(n);
    n.ready();
    await new Promise((r) => setTimeout(r, 300));
    const err = log.lines.find((l) => l.level === 'error');
    expect(err?.fields.reason).toMatch(
      /cannot start \/nonexistent\/python3: spawn \/nonexistent\/python3 ENOENT/,
    );
    await n.close();
  });

  it('reports a send failure from the relay (no one listening on the socket)', async () => {
    const log = new MemoryLogger();
    const n = notifier({ NOTIFY_SOCKET: tmpSocket() }, log);
    n.ready();
    const deadline = Date.now() + 10_000;
    while (!log.lines.some((l) => l.level === 'warn') && Date.now() < deadline)
      await new Promise((r) => setTimeout(r, 50));
    const warn = log.lines.find((l) => l.level === 'warn');
    expect(warn?.msg).toMatch(
      /^the sd_notify relay could not send a message to systemd \(further "sd-notify-send" problems are counted/,
    );
    expect(warn?.fields.relay_said).toMatch(/No such file or directory/);
  });
});

describe('service notifier off systemd and from the environment', () => {
  it('is a no-op without NOTIFY_SOCKET (a laptop)', () => {
    const n = createServiceNotifier({
      logger: new MemoryLogger(),
      env: { WATCHDOG_USEC: '30000000' },
    });
    expect(n).toBeInstanceOf(NoopNotifier);
    expect(n.active).toBe(false);
    expect(n.watchdogPingMs).toBeNull();
  });

  it('refuses a NOTIFY_SOCKET it cannot use, with an error line', () => {
    const log = new MemoryLogger();
    const n = createServiceNotifier({ logger: log, env: { NOTIFY_SOCKET: 'vsock:2:1234' } });
    expect(n.active).toBe(false);
    expect(log.lines[0]!.msg).toMatch(
      /NOTIFY_SOCKET is neither a path nor an abstract socket name/,
    );
  });

  it('reads the watchdog period as sd_watchdog_enabled(3) does', () => {
    expect(watchdogPingMsFromEnv({ WATCHDOG_USEC: '30000000' }, 42)).toBe(15_000);
    expect(watchdogPingMsFromEnv({ WATCHDOG_USEC: '30000000', WATCHDOG_PID: '42' }, 42)).toBe(
      15_000,
    );
    // meant for another process
    expect(watchdogPingMsFromEnv({ WATCHDOG_USEC: '30000000', WATCHDOG_PID: '41' }, 42)).toBeNull();
    expect(watchdogPingMsFromEnv({}, 42)).toBeNull();
    expect(watchdogPingMsFromEnv({ WATCHDOG_USEC: 'soon' }, 42)).toBeNull();
  });

  it('builds one datagram per call: state, then a one-line STATUS of at most 200 characters', () => {
    expect(notifyMessage('READY=1')).toBe('READY=1');
    expect(notifyMessage(null, 'a\r\nb\tc')).toBe('STATUS=a b c');
    expect(notifyMessage(null, 'x'.repeat(300))).toBe('STATUS=' + 'x'.repeat(200));
  });
});

describe('WatchdogKeeper', () => {
  it('pings every half WatchdogSec while healthy, withholds while not, and says so once each way', () => {
    const timers = new FakeTimers();
    const log = new MemoryLogger();
    const n = new MemoryNotifier(15_000);
    let problem: string | null = null;
    const keeper = new WatchdogKeeper(n, timers, log, () => problem);
    keeper.start();
    expect(n.messages).toEqual(['WATCHDOG=1']); // at once
    timers.advance(60_000);
    expect(n.messages).toHaveLength(5); // t = 0, 15, 30, 45, 60 s
    problem = 'no sample block for 20 s';
    timers.advance(60_000);
    expect(n.messages).toHaveLength(5);
    expect(log.lines).toEqual([
      {
        level: 'error',
        msg: expect.stringMatching(
          /^withholding the systemd watchdog ping: no sample block for 20 s/,
        ),
        fields: { reason: 'no sample block for 20 s' },
      },
    ]);
    problem = null;
    timers.advance(15_000);
    expect(n.messages).toHaveLength(6);
    expect(log.lines[1]).toMatchObject({
      level: 'info',
      fields: { was: 'no sample block for 20 s' },
    });
    keeper.stop();
    timers.advance(60_000);
    expect(n.messages).toHaveLength(6);
    expect(keeper.running).toBe(false);
  });

  it('treats a health check that throws as unhealthy', () => {
    const timers = new FakeTimers();
    const log = new MemoryLogger();
    const n = new MemoryNotifier(1000);
    new WatchdogKeeper(n, timers, log, () => {
      throw new Error('pipeline state unreadable');
    }).start();
    expect(n.messages).toEqual([]);
    expect(log.lines[0]!.fields.reason).toBe('health check failed: pipeline state unreadable');
  });

  it('does nothing when the service has no watchdog', () => {
    const timers = new FakeTimers();
    const n = new MemoryNotifier(null);
    const keeper = new WatchdogKeeper(n, timers, new MemoryLogger());
    keeper.start();
    timers.advance(600_000);
    expect(n.messages).toEqual([]);
    expect(keeper.running).toBe(false);
  });
});
